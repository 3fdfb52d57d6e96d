"""The site's own style sheet and script, written beside the pages (no web font, no CDN).

The look: warm paper, dark slate ink, one sea-green accent and one rust accent; sense cards side
by side; slots shown with a tag and an underline pattern, so colour is never the only cue. The
print rules drop the controls and print the cards one after another in black on white.
"""

from __future__ import annotations

__all__ = ["SCRIPT", "SCRIPT_FILE", "STYLE", "STYLE_FILE"]

STYLE_FILE = "style.css"
SCRIPT_FILE = "site.js"

STYLE = """\
:root{--paper:#fbf8f1;--ink:#1f2a30;--muted:#5b676d;--rule:#d9d2c3;--sea:#1e6b5c;
--rust:#a4462a;--card:#fffdf8;--bar:#7fa99f}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);
font:16px/1.5 "Iowan Old Style","Palatino Linotype","DejaVu Serif",Georgia,serif}
a{color:var(--sea)}a:focus-visible,button:focus-visible,input:focus-visible,
select:focus-visible{outline:3px solid var(--rust);outline-offset:2px}
.skip{position:absolute;left:-999px}.skip:focus{left:1em;top:1em;background:var(--card);
padding:.3em .6em;z-index:2}
header.site{border-bottom:4px double var(--rule);padding:.8em 1.5em .6em;display:flex;
flex-wrap:wrap;gap:.4em 2em;align-items:baseline}
header.site .title{font-variant:small-caps;letter-spacing:.04em;font-size:1.15em;
color:var(--ink);text-decoration:none}
header.site nav ul{list-style:none;margin:0;padding:0;display:flex;gap:1.2em;
font-family:system-ui,"DejaVu Sans",sans-serif;font-size:.92em}
main{padding:1em 1.5em 2em;max-width:78em}
h1{font-weight:normal;font-size:2em;margin:.3em 0 .2em}
h1 .pos{font-size:.5em;color:var(--muted);font-variant:small-caps;margin-left:.5em}
h2{font-weight:normal;border-bottom:1px solid var(--rule);margin-top:1.6em}
.meta,.notice,footer{font-family:system-ui,"DejaVu Sans",sans-serif;font-size:.9em;
color:var(--muted)}
.notice{border-left:4px solid var(--rust);padding:.2em .8em;background:var(--card)}
form.filters{display:flex;flex-wrap:wrap;gap:.6em 1.4em;align-items:end;margin:.6em 0 1em;
font-family:system-ui,"DejaVu Sans",sans-serif;font-size:.92em}
form.filters label{display:flex;flex-direction:column;gap:.15em}
input,select,button{font:inherit;color:inherit;background:var(--card);
border:1px solid var(--muted);border-radius:2px;padding:.25em .4em}
table{border-collapse:collapse;width:100%;background:var(--card)}
th,td{text-align:left;padding:.35em .6em;border-bottom:1px solid var(--rule);vertical-align:top}
th{font-family:system-ui,"DejaVu Sans",sans-serif;font-size:.85em;font-weight:600}
th button{border:0;background:none;padding:0;font-weight:600;cursor:pointer}
th[aria-sort=ascending] button::after{content:" \\25B2"}
th[aria-sort=descending] button::after{content:" \\25BC"}
td.n,th.n{text-align:right;font-variant-numeric:tabular-nums}
.status{display:inline-block;font-family:system-ui,"DejaVu Sans",sans-serif;font-size:.75em;
padding:0 .45em;border-radius:1em;border:1px solid var(--ink);white-space:nowrap}
.status.draft{border-style:dashed}
.status.reviewed{border-width:2px}
.status.approved{background:var(--sea);border-color:var(--sea);color:#fff}
.status.retired{text-decoration:line-through;color:var(--muted);border-color:var(--muted)}
.flag{display:inline-block;font-family:system-ui,"DejaVu Sans",sans-serif;font-size:.75em;
color:var(--rust);border:1px solid var(--rust);padding:0 .4em;margin:.1em .2em .1em 0}
.flag::before{content:"\\2691  "}
.senses{display:grid;grid-template-columns:repeat(auto-fill,minmax(21em,1fr));gap:1em}
article.sense{background:var(--card);border:1px solid var(--rule);border-top:5px solid var(--sea);
padding:.6em 1em 1em}
article.sense.retired{border-top-color:var(--muted);opacity:.8}
article.sense h2{border:0;margin:0;font-size:1.1em;display:flex;gap:.6em;align-items:center;
font-family:system-ui,"DejaVu Sans",sans-serif}
.gloss{font-size:1.1em;font-style:italic;margin:.3em 0}
.note{border-left:3px solid var(--rule);padding-left:.6em;margin:.4em 0}
article.sense h3{font-size:.85em;text-transform:uppercase;letter-spacing:.06em;color:var(--muted);
margin:1em 0 .3em;font-family:system-ui,"DejaVu Sans",sans-serif}
ul.frames{list-style:none;margin:0;padding:0}
ul.frames li{display:grid;grid-template-columns:minmax(9em,auto) 1fr 3.5em;gap:.5em;
align-items:center;margin:.15em 0}
code{font-family:"DejaVu Sans Mono",Menlo,Consolas,monospace;font-size:.85em}
.meter{display:block;height:.55em;min-width:4em;background:var(--rule);position:relative}
td code{white-space:nowrap}
table.bars td.bar{width:40%}
.diag-grid{display:grid;grid-template-columns:repeat(auto-fill,minmax(27em,1fr));gap:1em}
.diag-grid>div{overflow-x:auto}
.meter span{position:absolute;left:0;top:0;bottom:0;background:var(--bar)}
ol.examples{margin:0;padding-left:1.3em}ol.examples li{margin:.35em 0}
.src{font-family:system-ui,"DejaVu Sans",sans-serif;font-size:.75em;color:var(--muted)}
.verb{font-weight:bold;color:var(--rust)}
mark{background:none;color:inherit;padding-bottom:1px;border-bottom:2px solid var(--sea)}
mark sub{font-family:system-ui,"DejaVu Sans",sans-serif;font-size:.62em;color:var(--muted);
margin-left:.1em}
mark.s-subj{border-bottom-style:solid}mark.s-obj{border-bottom-style:double;border-bottom-width:4px}
mark.s-iobj{border-bottom-style:dashed}mark.s-obl{border-bottom-style:dotted;
border-bottom-width:3px}
mark.s-comp,mark.s-pred{border-bottom-color:var(--rust)}mark.s-refl{border-bottom-color:var(--muted)}
dl.legend{display:flex;flex-wrap:wrap;gap:.2em 1.2em;font-family:system-ui,"DejaVu Sans",
sans-serif;font-size:.85em;margin:.4em 0 1em}
dl.legend div{display:flex;gap:.35em}dl.legend dt{font-weight:600}dl.legend dd{margin:0}
figure{margin:1em 0}figure img{max-width:100%;height:auto;background:#fff;
border:1px solid var(--rule)}
figcaption{font-size:.9em;color:var(--muted)}
footer{border-top:1px solid var(--rule);padding:.8em 1.5em}
[hidden]{display:none!important}
@media print{
body{background:#fff;color:#000;font-size:11pt}
.skip,form.filters,header.site nav,th button::after{display:none}
a{color:#000;text-decoration:none}
main{padding:0;max-width:none}
.senses,.diag-grid{display:block}
article.sense{break-inside:avoid;border:1px solid #000;border-top-width:3px;margin:0 0 .8em;
background:#fff}
.status.approved{background:#fff;color:#000;border-color:#000}
.meter{border:1px solid #000;background:#fff}.meter span{background:#000}
mark[class]{border-bottom-color:#000}.verb{color:#000}
.meter span{background:#555}
table{background:#fff}
}
"""

# Filter and sort of the index; an entry row carries what the filters read in data-*
# attributes. Plain DOM code, no library, nothing fetched.
SCRIPT = """\
(function () {
  "use strict";
  var form = document.getElementById("filters");
  var table = document.getElementById("entries");
  if (!form || !table) { return; }
  var body = table.tBodies[0];
  var rows = Array.prototype.slice.call(body.rows);
  var query = document.getElementById("q");
  var status = document.getElementById("status");
  var flag = document.getElementById("flag");
  var shown = document.getElementById("shown");
  function words(value) { return (value || "").split(" ").filter(Boolean); }
  function apply() {
    var text = query.value.trim().toLowerCase();
    var count = 0;
    rows.forEach(function (row) {
      var ok = (!text || row.dataset.search.indexOf(text) !== -1) &&
        (!status.value || words(row.dataset.status).indexOf(status.value) !== -1) &&
        (!flag.value || words(row.dataset.flags).indexOf(flag.value) !== -1);
      row.hidden = !ok;
      if (ok) { count += 1; }
    });
    shown.textContent = String(count);
  }
  form.addEventListener("input", apply);
  form.addEventListener("change", apply);
  form.addEventListener("submit", function (event) { event.preventDefault(); apply(); });
  var headers = Array.prototype.slice.call(table.tHead.rows[0].cells);
  headers.forEach(function (th, column) {
    var button = th.querySelector("button");
    if (!button) { return; }
    button.addEventListener("click", function () {
      var ascending = th.getAttribute("aria-sort") !== "ascending";
      headers.forEach(function (other) { other.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
      var numeric = th.classList.contains("n");
      rows.sort(function (a, b) {
        var x = a.cells[column].dataset.value, y = b.cells[column].dataset.value;
        var order = numeric ? Number(x) - Number(y) :
          x.localeCompare(y, document.documentElement.lang);
        if (order === 0) { order = a.dataset.position - b.dataset.position; }
        return ascending ? order : -order;
      });
      rows.forEach(function (row) { body.appendChild(row); });
    });
  });
  apply();
}());
"""
