"use strict";
// The class check page: filter the class table by name. Reads no data, writes no text.
(function () {
  var box = document.getElementById("filter");
  if (!box) { return; }
  var rows = document.querySelectorAll(".class-table tbody tr");
  box.addEventListener("input", function () {
    var wanted = box.value.trim().toLowerCase();
    for (var i = 0; i < rows.length; i++) {
      var name = rows[i].getAttribute("data-name") || "";
      rows[i].hidden = wanted !== "" && name.indexOf(wanted) < 0;
    }
  });
})();
