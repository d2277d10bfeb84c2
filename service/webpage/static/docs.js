// Starts Swagger UI on the service's own contract. Kept in a file of its own because the
// page's Content Security Policy allows no inline script.
"use strict";

window.addEventListener("DOMContentLoaded", () => {
  window.ui = window.SwaggerUIBundle({
    url: "/openapi.yaml",
    dom_id: "#reference",
    deepLinking: true,
    // No call to an outside validator: the service's pages load nothing from elsewhere.
    validatorUrl: null,
    presets: [window.SwaggerUIBundle.presets.apis],
    layout: "BaseLayout",
  });
});
