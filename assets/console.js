/* fxledger console: the little script the pages use. Everything works
   without it; it only moves the focus where the next keystroke belongs. */
"use strict";
document.addEventListener("DOMContentLoaded", function () {
  /* a link or button marked data-focus (autofocus covers form fields) */
  var target = document.querySelector("[autofocus]") || document.querySelector("[data-focus]");
  if (target && document.activeElement !== target) {
    target.focus();
  }
  /* a reading must be a number: say so before the round trip */
  document.querySelectorAll("input[name=reading]").forEach(function (input) {
    input.addEventListener("input", function () {
      var v = input.value.trim();
      input.setCustomValidity(v === "" || /^[0-9]*[.]?[0-9]+$/.test(v) ? "" :
        "Enter the electrometer reading as a number, for example 1.234");
    });
  });
});
