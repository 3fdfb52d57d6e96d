"""Extra schemas (``extra_schemas`` in lexicon.yaml) are read only inside the sources folder and
never reach the network: a loopback HTTP server counts the requests that would leave."""

from __future__ import annotations

import http.server
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import ClassVar

import pytest

from lexbuild.errors import SchemaError
from lexbuild.formats.validate import validate_bytes
from lexbuild.lexicon.model import ExtraSchema

DOCUMENT = b'<LexicalResource dtdVersion="16"/>'


class _Counting(http.server.BaseHTTPRequestHandler):
    requests: ClassVar[list[str]] = []

    def do_GET(self) -> None:
        _Counting.requests.append(self.path)
        body = b'<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema"/>'
        self.send_response(200)
        self.send_header("Content-Length", str(len(body)))
        self.end_headers()
        self.wfile.write(body)

    def log_message(self, *args: object) -> None:
        pass


@pytest.fixture
def server() -> Iterator[str]:
    _Counting.requests = []
    httpd = http.server.HTTPServer(("127.0.0.1", 0), _Counting)
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{httpd.server_address[1]}"
    finally:
        httpd.shutdown()
        httpd.server_close()


def _validate(folder: Path, extra: ExtraSchema, schemas_dir: Path) -> None:
    validate_bytes(DOCUMENT, schemas_dir=schemas_dir, extra_schemas=[extra], base_dir=folder)


def test_the_server_answers(server: str) -> None:
    # The control: the server does count a request, so a count of 0 below means something.
    import urllib.request

    with urllib.request.urlopen(f"{server}/probe.xsd", timeout=5) as answer:
        assert answer.status == 200
    assert _Counting.requests == ["/probe.xsd"]


@pytest.mark.parametrize(
    ("kind", "text"),
    [
        (
            "xsd",
            '<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema">'
            '<xs:import namespace="urn:x" schemaLocation="{url}/remote.xsd"/>'
            '<xs:element name="LexicalResource"/></xs:schema>',
        ),
        (
            "xsd",
            '<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema">'
            '<xs:include schemaLocation="{url}/remote.xsd"/></xs:schema>',
        ),
        (
            "rng",
            '<grammar xmlns="http://relaxng.org/ns/structure/1.0">'
            '<include href="{url}/remote.rng"/></grammar>',
        ),
        (
            "rng",
            '<element name="LexicalResource" xmlns="http://relaxng.org/ns/structure/1.0">'
            '<externalRef href="{url}/remote.rng"/></element>',
        ),
        (
            "sch",
            '<schema xmlns="http://purl.oclc.org/dsdl/schematron" '
            'xmlns:xi="http://www.w3.org/2001/XInclude"><xi:include href="{url}/p.sch"/></schema>',
        ),
    ],
)
def test_no_request_leaves(
    tmp_path: Path, server: str, schemas_dir: Path, kind: str, text: str
) -> None:
    (tmp_path / f"custom.{kind}").write_text(text.format(url=server), encoding="utf-8")
    extra = ExtraSchema(path=f"custom.{kind}", kind=kind, format="lmf")
    with pytest.raises(SchemaError, match="network"):
        _validate(tmp_path, extra, schemas_dir)
    assert _Counting.requests == []


def test_nested_local_schema_with_remote_import_is_refused(
    tmp_path: Path, server: str, schemas_dir: Path
) -> None:
    (tmp_path / "inner.xsd").write_text(
        '<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema">'
        f'<xs:import namespace="urn:y" schemaLocation="{server}/deep.xsd"/></xs:schema>',
        encoding="utf-8",
    )
    (tmp_path / "outer.xsd").write_text(
        '<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema">'
        '<xs:include schemaLocation="inner.xsd"/></xs:schema>',
        encoding="utf-8",
    )
    with pytest.raises(SchemaError, match="network"):
        _validate(tmp_path, ExtraSchema(path="outer.xsd", kind="xsd", format="lmf"), schemas_dir)
    assert _Counting.requests == []


@pytest.mark.parametrize("path", ["../outside.xsd", "/etc/passwd", "sub/../../outside.xsd"])
def test_paths_outside_the_sources_folder_are_refused(
    tmp_path: Path, schemas_dir: Path, path: str
) -> None:
    folder = tmp_path / "sources"
    folder.mkdir()
    (tmp_path / "outside.xsd").write_text(
        '<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema"/>', encoding="utf-8"
    )
    with pytest.raises(SchemaError, match="relative to the sources folder"):
        _validate(folder, ExtraSchema(path=path, kind="xsd", format="lmf"), schemas_dir)


def test_symbolic_link_out_of_the_folder_is_refused(tmp_path: Path, schemas_dir: Path) -> None:
    folder = tmp_path / "sources"
    folder.mkdir()
    outside = tmp_path / "outside.xsd"
    outside.write_text('<xs:schema xmlns:xs="http://www.w3.org/2001/XMLSchema"/>', "utf-8")
    (folder / "link.xsd").symlink_to(outside)
    with pytest.raises(SchemaError, match="leads out of the sources folder"):
        _validate(folder, ExtraSchema(path="link.xsd", kind="xsd", format="lmf"), schemas_dir)


def test_include_outside_the_folder_is_refused(tmp_path: Path, schemas_dir: Path) -> None:
    folder = tmp_path / "sources"
    folder.mkdir()
    (tmp_path / "outside.rng").write_text(
        '<grammar xmlns="http://relaxng.org/ns/structure/1.0"/>', "utf-8"
    )
    (folder / "custom.rng").write_text(
        '<grammar xmlns="http://relaxng.org/ns/structure/1.0">'
        '<include href="../outside.rng"/></grammar>',
        encoding="utf-8",
    )
    with pytest.raises(SchemaError, match="outside the sources folder"):
        _validate(folder, ExtraSchema(path="custom.rng", kind="rng", format="lmf"), schemas_dir)
