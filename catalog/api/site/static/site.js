// gravicat site: search and filters of the index table (plain JavaScript, no libraries).
(function () {
  "use strict";
  var table = document.getElementById("entries");
  var form = document.getElementById("filters");
  if (!table || !form) { return; }
  form.hidden = false;
  var rows = Array.prototype.slice.call(table.tBodies[0].rows);
  var search = document.getElementById("search");
  var equations = document.getElementById("filter-equations");
  var status = document.getElementById("filter-status");
  var tag = document.getElementById("filter-tag");
  var dimension = document.getElementById("filter-dimension");
  var count = document.getElementById("match-count");

  function apply() {
    var words = search.value.toLowerCase().split(/\s+/).filter(function (w) { return w.length > 0; });
    var shown = 0;
    rows.forEach(function (row) {
      var text = row.getAttribute("data-text");
      var ok = words.every(function (w) { return text.indexOf(w) !== -1; });
      ok = ok && (!equations.value || row.getAttribute("data-equations") === equations.value);
      ok = ok && (!status.value || row.getAttribute("data-status") === status.value);
      ok = ok && (!dimension.value || row.getAttribute("data-dimension").split(" ").indexOf(dimension.value) !== -1);
      ok = ok && (!tag.value || row.getAttribute("data-tags").split(" ").indexOf(tag.value) !== -1);
      row.hidden = !ok;
      if (ok) { shown += 1; }
    });
    count.textContent = shown + " of " + rows.length + " entries shown";
  }

  [search, equations, status, tag, dimension].forEach(function (el) {
    el.addEventListener("input", apply);
    el.addEventListener("change", apply);
  });
  form.addEventListener("submit", function (event) { event.preventDefault(); });
  apply();
}());
