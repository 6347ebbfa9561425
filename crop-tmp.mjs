import { chromium } from 'playwright-core';
const [file, y, h, out] = process.argv.slice(2);
const b = await chromium.launch({ executablePath: '/usr/bin/chromium', args: ['--no-sandbox', '--disable-gpu'] });
const p = await b.newPage({ viewport: { width: 1366, height: Number(h) } });
await p.setContent(`<body style="margin:0"><img id="i" src="data:image/png;base64,${(await import('node:fs')).readFileSync(file).toString('base64')}" style="display:block;width:1366px;position:absolute;top:-${y}px"></body>`);
await p.waitForFunction(() => document.getElementById('i').complete);
await p.screenshot({ path: out });
await b.close();
