/* Copy a number's citation line: the buttons beside the numbers (class xv-copy) carry it in
   data-cite; in the register, where the line is shown, a button copies the line it stands in
   (its code.xv-cite). navigator.clipboard needs a secure context (https or localhost); over plain http
   on an intranet the text is copied through a hidden text area, and where even that is refused
   it is shown selected in a prompt for Ctrl+C. Nothing is fetched from anywhere. */
(function () {
  "use strict";

  function mark(button, ok) {
    button.setAttribute("data-copied", ok ? "yes" : "no");
    var label = button.textContent;
    button.textContent = ok ? "copied" : "select";
    window.setTimeout(function () {
      button.textContent = label === "copied" || label === "select" ? "copy" : label;
      button.removeAttribute("data-copied");
    }, 1500);
  }

  function fallback(button, text) {
    var area = document.createElement("textarea");
    area.value = text;
    area.setAttribute("readonly", "");
    area.style.position = "fixed";
    area.style.top = "0";
    area.style.opacity = "0";
    document.body.appendChild(area);
    area.select();
    var ok = false;
    try {
      ok = document.execCommand("copy");
    } catch (e) {
      ok = false;
    }
    document.body.removeChild(area);
    if (!ok) {
      window.prompt("Copy this citation line (Ctrl+C):", text);
    }
    mark(button, ok);
  }

  document.addEventListener("click", function (event) {
    var button = event.target.closest ? event.target.closest(".xv-copy") : null;
    if (!button) {
      return;
    }
    event.preventDefault();
    var text = button.getAttribute("data-cite");
    if (text === null) {
      var line = button.closest(".xv-reg");
      var code = line ? line.querySelector("code.xv-cite") : null;
      text = code ? code.textContent : "";
    }
    if (navigator.clipboard && window.isSecureContext) {
      navigator.clipboard.writeText(text).then(function () {
        mark(button, true);
      }, function () {
        fallback(button, text);
      });
    } else {
      fallback(button, text);
    }
  });

  // a link to a number inside a folded part (site_templates/fold.md.j2) opens the fold
  function openTarget() {
    var id = window.location.hash ? decodeURIComponent(window.location.hash.slice(1)) : "";
    var el = id ? document.getElementById(id) : null;
    var found = false;
    for (var d = el ? el.closest("details") : null; d; d = d.parentElement.closest("details")) {
      d.setAttribute("open", "");
      found = true;
    }
    if (found) {
      el.scrollIntoView();
    }
  }
  window.addEventListener("hashchange", openTarget);
  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", openTarget);
  } else {
    openTarget();
  }

  // a printed copy shows the folded parts too; they fold again afterwards
  var opened = [];
  window.addEventListener("beforeprint", function () {
    var folded = document.querySelectorAll("details:not([open])");
    for (var i = 0; i < folded.length; i++) {
      folded[i].setAttribute("open", "");
      opened.push(folded[i]);
    }
  });
  window.addEventListener("afterprint", function () {
    while (opened.length) {
      opened.pop().removeAttribute("open");
    }
  });
})();
