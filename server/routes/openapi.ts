import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import express, { Router } from 'express';
import type { AppDeps } from '../deps';
import { requireAccess, requireUser } from '../auth/guards';
import { projectRoot } from '../paths';

const viewerDir = dirname(fileURLToPath(import.meta.resolve('swagger-ui-dist/package.json')));
const ownAssets = join(projectRoot, 'server/exchange/docs-assets');

const docsPage = `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Plumbline API reference</title>
<link rel="stylesheet" href="/api/docs/viewer/swagger-ui.css">
<link rel="stylesheet" href="/api/docs/own/docs.css">
</head>
<body>
<main>
<div class="intro">
<h1>Plumbline API reference</h1>
<p>Generated from the schemas the server checks every request with. The same document as JSON: <a href="/api/openapi.json">/api/openapi.json</a>. Machine clients are registered in People &amp; places.</p>
</div>
<div id="reference"></div>
</main>
<script src="/api/docs/viewer/swagger-ui-bundle.js"></script>
<script src="/api/docs/own/start-docs.js"></script>
</body>
</html>`;

/** The OpenAPI document, and a reference page for administrators with a viewer served from here (no outside origin). */
export function openApiRouter({ db, config, publicUrl }: AppDeps): Router {
  const router = Router();
  const tokenUrl = config.oidc.issuer ? null : `${publicUrl}/idp/token`;
  let document: string | undefined;
  router.get('/api/openapi.json', async (_req, res) => {
    // Made at the first request: the document's generator is not worth its memory at every start.
    document ??= JSON.stringify((await import('../openapi')).openApiDocument(publicUrl, tokenUrl));
    res.type('application/json').set('Cache-Control', 'no-cache').send(document);
  });
  router.get('/api/docs', requireUser(db), requireAccess('docs.read'), (_req, res) => {
    res.type('html').set('Cache-Control', 'no-cache').send(docsPage);
  });
  router.use('/api/docs/viewer', express.static(viewerDir, { index: false, maxAge: '1d' }));
  router.use('/api/docs/own', express.static(ownAssets, { index: false, maxAge: '1h' }));
  return router;
}
