// The cluster table of one contrast: size in voxels and mm³, peak z, peak
// statistic, corrected p and peak position; clicking a row calls
// opts.onSelect(index). Pure: render builds the table from its arguments.
//
// data: {clusters: summary.json clusters, kind: "t" | "F", correction}
// opts: {selected: row index or -1, onSelect(index), maxRows: rows shown
//        (default 100; the rest are counted in a last row, since thousands of
//        table rows take seconds to lay out)}

function num(v, digits) {
  return v === null || v === undefined || !Number.isFinite(v) ? "\u2014" : v.toFixed(digits);
}

function pText(p) {
  if (p === null || p === undefined) return "\u2014";
  if (p < 1e-4) return "< 0.0001";
  return p.toFixed(4);
}

export function render(el, data, opts = {}) {
  el.textContent = "";
  const table = document.createElement("table");
  table.className = "clusters";
  const head = table.createTHead().insertRow();
  const cols = ["#", "voxels", "mm\u00b3", "peak z", `peak ${data.kind}`, "p corrected", "peak x, y, z (mm)"];
  for (const c of cols) {
    const th = document.createElement("th");
    th.textContent = c;
    th.scope = "col";
    head.appendChild(th);
  }
  const body = table.createTBody();
  const list = data.clusters || [];
  if (list.length === 0) {
    const td = body.insertRow().insertCell();
    td.colSpan = cols.length;
    td.className = "empty";
    td.textContent = `No cluster survives (${data.correction}).`;
  }
  const maxRows = opts.maxRows || 100;
  list.slice(0, maxRows).forEach((c, i) => {
    const tr = body.insertRow();
    tr.tabIndex = 0;
    tr.dataset.index = String(i);
    if (i === opts.selected) tr.className = "selected";
    const cells = [
      String(i + 1),
      String(c.voxels),
      num(c.volume_mm3, 0),
      num(c.peak_z, 2),
      num(c.peak_stat, 2),
      pText(c.p_corrected),
      c.peak_mm.map((v) => v.toFixed(1)).join(", "),
    ];
    for (const text of cells) tr.insertCell().textContent = text;
    const select = () => opts.onSelect && opts.onSelect(i);
    tr.addEventListener("click", select);
    tr.addEventListener("keydown", (e) => {
      if (e.key === "Enter" || e.key === " ") {
        e.preventDefault();
        select();
      }
    });
  });
  if (list.length > maxRows) {
    const td = body.insertRow().insertCell();
    td.colSpan = cols.length;
    td.className = "empty";
    td.textContent = `… and ${list.length - maxRows} smaller clusters, not listed here (Save clusters.tsv for all ${list.length}).`;
  }
  el.appendChild(table);
}
