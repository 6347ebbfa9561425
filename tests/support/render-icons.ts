// Renders the app icons (src/public/icons/*.svg) to the PNG sizes phones and tablets ask for.
// Run by hand after changing an SVG: npx tsx tests/support/render-icons.ts
import { readFileSync } from 'node:fs';
import { launchBrowser } from '../e2e/support/browser';

const dir = 'src/public/icons';
const renders = [
  { svg: 'icon.svg', size: 192, png: 'icon-192.png' },
  { svg: 'icon.svg', size: 512, png: 'icon-512.png' },
  { svg: 'icon.svg', size: 180, png: 'apple-touch-icon.png' },
  { svg: 'maskable.svg', size: 512, png: 'maskable-512.png' },
];

const browser = await launchBrowser();
try {
  for (const { svg, size, png } of renders) {
    const page = await browser.newPage({ viewport: { width: size, height: size } });
    const markup = readFileSync(`${dir}/${svg}`, 'utf8').replace('<svg ', `<svg width="${size}" height="${size}" `);
    await page.setContent(`<html><body style="margin:0">${markup}</body></html>`);
    await page.locator('svg').screenshot({ path: `${dir}/${png}`, omitBackground: false });
    await page.close();
  }
} finally {
  await browser.close();
}
