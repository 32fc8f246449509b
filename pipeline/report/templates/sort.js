// Sorts the catalog table by a clicked header; without JS the table stays in catalog order.
// Inlined into the catalog page and allowed to run by its sha256 in the page's Content-Security-Policy.
document.documentElement.classList.add("js");
Array.prototype.forEach.call(document.querySelectorAll("table.sortable"), function (t) {
  var heads = t.tHead.rows[0].cells;
  Array.prototype.forEach.call(heads, function (th, col) {
    var kind = th.getAttribute("data-sort");
    if (!kind) return;
    th.tabIndex = 0;
    function key(row) {
      var c = row.cells[col], v = c.getAttribute("data-v");
      return v === null ? c.textContent.trim() : v;
    }
    function go() {
      var asc = th.getAttribute("aria-sort") !== "ascending";
      Array.prototype.forEach.call(heads, function (h) { h.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", asc ? "ascending" : "descending");
      var body = t.tBodies[0], rows = Array.prototype.slice.call(body.rows);
      rows.sort(function (a, b) {
        var x = key(a), y = key(b);
        if (kind === "num") {
          var fx = parseFloat(x), fy = parseFloat(y), nx = isNaN(fx), ny = isNaN(fy);
          if (nx || ny) return nx - ny;
          return asc ? fx - fy : fy - fx;
        }
        return asc ? x.localeCompare(y) : y.localeCompare(x);
      });
      rows.forEach(function (r) { body.appendChild(r); });
    }
    th.addEventListener("click", go);
    th.addEventListener("keydown", function (e) {
      if (e.key === "Enter" || e.key === " ") { e.preventDefault(); go(); }
    });
  });
});
