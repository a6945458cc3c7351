// The handout's print button (a script file: the page's security policy allows no inline script).
document.addEventListener("DOMContentLoaded", function () {
  "use strict";
  var button = document.getElementById("print");
  if (button) button.addEventListener("click", function () { window.print(); });
});
