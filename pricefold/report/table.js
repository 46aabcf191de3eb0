(function () {
  "use strict";
  var table = document.getElementById("decisions-table");
  var controls = document.getElementById("decisions-controls");
  if (!table || !controls) { return; }
  var body = table.tBodies[0];
  var rows = Array.prototype.slice.call(body.rows);
  var search = controls.querySelector("input");
  var status = controls.querySelector("select");
  var shown = controls.querySelector("output");
  function filter() {
    var needle = search.value.trim().toLowerCase();
    var wanted = status.value;
    var count = 0;
    rows.forEach(function (row) {
      var keep = (!wanted || row.getAttribute("data-status") === wanted) &&
        (!needle || row.textContent.toLowerCase().indexOf(needle) >= 0);
      row.hidden = !keep;
      if (keep) { count += 1; }
    });
    shown.textContent = count.toLocaleString("en") + " of " + rows.length.toLocaleString("en") + " rows shown";
  }
  function value(row, column, numeric) {
    var cell = row.cells[column];
    var raw = cell.getAttribute("data-sort");
    if (numeric) { return raw === null || raw === "" ? NaN : parseFloat(raw); }
    return (raw === null ? cell.textContent : raw).toLowerCase();
  }
  var heads = Array.prototype.slice.call(table.tHead.rows[0].cells);
  heads.forEach(function (head, column) {
    var button = document.createElement("button");
    button.type = "button";
    button.textContent = head.textContent;
    head.textContent = "";
    head.appendChild(button);
    button.addEventListener("click", function () {
      var up = head.getAttribute("aria-sort") !== "ascending";
      var numeric = head.classList.contains("num");
      heads.forEach(function (other) { other.removeAttribute("aria-sort"); });
      head.setAttribute("aria-sort", up ? "ascending" : "descending");
      var keyed = rows.map(function (row, at) { return [value(row, column, numeric), at, row]; });
      keyed.sort(function (a, b) {
        var x = a[0], y = b[0];
        var missing = (numeric && isNaN(x)) - (numeric && isNaN(y));
        if (missing) { return missing; }
        if (x < y) { return up ? -1 : 1; }
        if (x > y) { return up ? 1 : -1; }
        return a[1] - b[1];
      });
      var fragment = document.createDocumentFragment();
      rows = keyed.map(function (item) { fragment.appendChild(item[2]); return item[2]; });
      body.appendChild(fragment);
    });
  });
  search.addEventListener("input", filter);
  status.addEventListener("change", filter);
  controls.hidden = false;
  filter();
}());
