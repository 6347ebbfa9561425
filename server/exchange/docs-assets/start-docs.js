// Starts the bundled reference viewer on this server's own OpenAPI document; read-only.
window.addEventListener('load', function () {
  window.SwaggerUIBundle({
    url: '/api/openapi.json',
    dom_id: '#reference',
    deepLinking: true,
    supportedSubmitMethods: [],
    defaultModelsExpandDepth: 0,
    docExpansion: 'list',
  });
});
