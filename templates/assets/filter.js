// Catalogue filter: search by text and status, offline, no dependencies.
// Without JavaScript the full table is shown and the controls stay hidden.
(function () {
  "use strict";
  var table = document.getElementById("systems");
  var controls = document.getElementById("filters");
  if (!table || !controls) { return; }
  var text = document.getElementById("filter-text");
  var status = document.getElementById("filter-status");
  var count = document.getElementById("filter-count");
  var rows = Array.prototype.slice.call(table.tBodies[0].rows);
  controls.hidden = false;

  function apply() {
    var words = text.value.toLowerCase().split(/\s+/).filter(Boolean);
    var wanted = status.value;
    var shown = 0;
    rows.forEach(function (row) {
      var hay = row.getAttribute("data-search");
      var statuses = row.getAttribute("data-status").split(" ");
      var ok = words.every(function (w) { return hay.indexOf(w) !== -1; }) &&
               (!wanted || statuses.indexOf(wanted) !== -1);
      row.hidden = !ok;
      if (ok) { shown += 1; }
    });
    count.textContent = shown + " of " + rows.length + " systems";
  }
  text.addEventListener("input", apply);
  status.addEventListener("change", apply);
  apply();
}());
