// Optional: narrow the asset tables of the index as you type. The page works without it.
(function () {
  "use strict";
  var box = document.getElementById("filter");
  if (!box) { return; }
  var rows = Array.prototype.slice.call(document.querySelectorAll("[data-row]"));
  var groups = Array.prototype.slice.call(document.querySelectorAll("[data-group]"));
  var count = document.getElementById("filter-count");
  box.parentNode.hidden = false;
  box.addEventListener("input", function () {
    var words = box.value.toLowerCase().split(/\s+/).filter(Boolean);
    var shown = 0;
    rows.forEach(function (row) {
      var text = row.textContent.toLowerCase();
      var keep = words.every(function (w) { return text.indexOf(w) !== -1; });
      row.hidden = !keep;
      if (keep) { shown += 1; }
    });
    groups.forEach(function (g) { g.hidden = !g.querySelector("[data-row]:not([hidden])"); });
    count.textContent = words.length ? shown + " of " + rows.length + " assets" : "";
  });
}());
