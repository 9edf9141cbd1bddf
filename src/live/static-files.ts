import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { packagePath } from '../core/paths.js';

export interface StaticFile {
  body: Buffer;
  contentType: string;
}

/**
 * The live page is plain files under src/live/page/, read from the package root so the same
 * path works from the sources (tests) and from dist/ (the installed command). The chart
 * library comes from the installed uplot package: served by the daemon, never from a CDN.
 */
export const PAGE_DIR = packagePath('src/live/page');

function uplotDist(): string {
  return join(dirname(createRequire(import.meta.url).resolve('uplot/package.json')), 'dist');
}

const JS = 'text/javascript; charset=utf-8';
const CSS = 'text/css; charset=utf-8';

/** URL path -> file, loaded once at server start. */
export function loadStaticFiles(): Map<string, StaticFile> {
  const uplot = uplotDist();
  const files: Array<[string, string, string]> = [
    ['/', join(PAGE_DIR, 'index.html'), 'text/html; charset=utf-8'],
    ['/assets/live.js', join(PAGE_DIR, 'live.js'), JS],
    ['/assets/time-axis.js', join(PAGE_DIR, 'time-axis.js'), JS],
    ['/assets/live.css', join(PAGE_DIR, 'live.css'), CSS],
    ['/assets/icon.svg', join(PAGE_DIR, 'icon.svg'), 'image/svg+xml'],
    // A station's overview: one tile per channel, each opening that channel's page.
    ['/station', join(PAGE_DIR, 'station.html'), 'text/html; charset=utf-8'],
    ['/assets/station.js', join(PAGE_DIR, 'station.js'), JS],
    ['/assets/station.css', join(PAGE_DIR, 'station.css'), CSS],
    ['/assets/uplot.js', join(uplot, 'uPlot.iife.min.js'), JS],
    ['/assets/uplot.css', join(uplot, 'uPlot.min.css'), CSS],
  ];
  return new Map(
    files.map(([url, path, contentType]) => [url, { body: readFileSync(path), contentType }]),
  );
}
