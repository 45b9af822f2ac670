// The submission form, progressively: each measurement row shows only the field groups of its
// chosen quantity (the others are hidden and disabled, so they are not sent), and the new-galaxy
// fields hide while a galaxy of the catalog is typed in the picker. Without this script every
// group shows under a heading naming its quantity, and the server reads only what applies.
(function () {
  "use strict";

  function showGroups(row) {
    var chooser = row.querySelector("select[name$='_quantity']");
    if (!chooser) {
      return;
    }
    var quantity = chooser.value;
    var groups = row.querySelectorAll("fieldset.for-quantity");
    for (var i = 0; i < groups.length; i++) {
      var group = groups[i];
      var applies = (group.getAttribute("data-quantities") || "")
        .split(" ")
        .indexOf(quantity) >= 0;
      group.hidden = !applies;
      group.disabled = !applies;
    }
  }

  function showNewGalaxy(picker, section) {
    section.hidden = picker.value.trim() !== "";
  }

  function start() {
    var form = document.getElementById("submission-form");
    if (!form) {
      return;
    }
    var rows = form.querySelectorAll("fieldset.measurement-row");
    for (var i = 0; i < rows.length; i++) {
      (function (row) {
        showGroups(row);
        var chooser = row.querySelector("select[name$='_quantity']");
        if (chooser) {
          chooser.addEventListener("change", function () {
            showGroups(row);
          });
        }
      })(rows[i]);
    }
    var picker = document.getElementById("f-galaxy");
    var section = document.getElementById("new-galaxy");
    if (picker && section) {
      showNewGalaxy(picker, section);
      picker.addEventListener("input", function () {
        showNewGalaxy(picker, section);
      });
    }
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
})();
