// The planning form's "Add a resolution row" button: copies the last empty resolution row
// (label and arcsec) with fresh ids, so a member can give more instruments than the rows the
// page shows. Without script the page always shows two empty rows; running the plan with them
// filled shows two more.
(function () {
  "use strict";
  var button = document.getElementById("add-resolution");
  var list = document.getElementById("resolution-rows");
  if (!button || !list) {
    return;
  }
  button.hidden = false;
  button.addEventListener("click", function () {
    var rows = list.querySelectorAll(".resolution-row");
    var last = rows[rows.length - 1];
    if (!last) {
      return;
    }
    var copy = last.cloneNode(true);
    var n = rows.length + 1;
    copy.querySelectorAll("input").forEach(function (input) {
      input.value = "";
      input.removeAttribute("aria-invalid");
      input.removeAttribute("aria-describedby");
      var old = input.id;
      input.id = old.replace(/-\d+$/, "-" + n);
      var label = copy.querySelector('label[for="' + old + '"]');
      if (label) {
        label.setAttribute("for", input.id);
      }
    });
    copy.querySelectorAll(".field-error").forEach(function (p) {
      p.remove();
    });
    list.appendChild(copy);
    copy.querySelector("input").focus();
  });
})();
