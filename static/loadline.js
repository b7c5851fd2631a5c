// Loadline's only script: hands the page's CSRF token to htmx requests. Pages work without it.
(function () {
  "use strict";
  function csrfToken() {
    var meta = document.querySelector('meta[name="csrf-token"]');
    return meta ? meta.getAttribute("content") : "";
  }
  document.addEventListener("htmx:configRequest", function (event) {
    event.detail.headers["X-CSRF-Token"] = csrfToken();
  });
})();
