// Starts the vendored Swagger UI on /docs; a file of its own so no inline script is needed.
(function () {
  "use strict";
  window.addEventListener("load", function () {
    window.SwaggerUIBundle({
      url: "/openapi.json",
      dom_id: "#swagger-ui",
      deepLinking: true,
    });
  });
})();
