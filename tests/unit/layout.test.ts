import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import madge from 'madge';
import { describe, expect, it } from 'vitest';

// The house's rules, checked on the files themselves (DEVELOPERS.md, "The layout").

function sourceFiles(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((e) =>
    e.isDirectory() ? sourceFiles(join(dir, e.name)) : /\.(ts|vue|mjs)$/.test(e.name) && !e.name.endsWith('.d.ts') && !e.name.endsWith('.d.mts') ? [join(dir, e.name)] : [],
  );
}

describe('the layout', () => {
  it.each([
    ['server', 'server/tsconfig.json'],
    ['shared', 'server/tsconfig.json'],
    ['src', 'src/tsconfig.json'],
  ])('has no import circles in %s/', async (dir, tsConfig) => {
    const graph = await madge(dir, { fileExtensions: ['ts'], tsConfig, detectiveOptions: { ts: { skipTypeImports: false } } });
    expect(Object.keys(graph.obj()).length).toBeGreaterThan(20);
    expect(graph.circular()).toEqual([]);
  });

  it('has no source file over 400 lines', () => {
    const long = ['server', 'shared', 'src']
      .flatMap(sourceFiles)
      .map((file) => ({ file, lines: readFileSync(file, 'utf8').split('\n').length }))
      .filter(({ lines }) => lines > 400);
    expect(long).toEqual([]);
  });
});
