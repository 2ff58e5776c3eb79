/**
 * The source tree's import graph (tests/support/import-graph.ts): no import cycles anywhere in src, and no
 * page or endpoint under src/pages importing the database schema (src/db) or connection (src/lib/server/db.ts):
 * database access lives in the modules of src/lib/server. The first block shows the checks can fail, on
 * small graphs and files made here.
 */
import { mkdtempSync, mkdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, relative, resolve, sep } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { adjacency, astroScripts, buildImportGraph, chain, findCycles, specifiers } from '../support/import-graph';

const SRC = resolve(__dirname, '../../src');

describe('the import-graph tools', () => {
  it('finds a cycle in a small graph and names its chain', () => {
    const graph = new Map([
      ['a', ['b']],
      ['b', ['c']],
      ['c', ['a', 'd']],
      ['d', []],
    ]);
    expect(findCycles(graph)).toEqual([['a', 'b', 'c', 'a']]);
  });

  it('finds none in a graph without one, and reports a loop once however it is entered', () => {
    expect(findCycles(new Map([['a', ['b', 'c']], ['b', ['c']], ['c', []]]))).toEqual([]);
    expect(findCycles(new Map([['x', ['b']], ['b', ['a']], ['a', ['b']]]))).toEqual([['a', 'b', 'a']]);
    expect(findCycles(new Map([['a', ['a']]]))).toEqual([['a', 'a']]);
  });

  it('reads imports, re-exports and dynamic imports, and marks the type-only ones', () => {
    const found = specifiers(`
      import { a } from './a';
      import type { B } from './b';
      import { type C } from './c';
      import d, { type D } from './d';
      export { e } from './e';
      export type { F } from './f';
      const g = await import('./g');
      import 'side-effect';
    `);
    expect(found).toEqual([
      { specifier: './a', typeOnly: false },
      { specifier: './b', typeOnly: true },
      { specifier: './c', typeOnly: true },
      { specifier: './d', typeOnly: false },
      { specifier: './e', typeOnly: false },
      { specifier: './f', typeOnly: true },
      { specifier: './g', typeOnly: false },
      { specifier: 'side-effect', typeOnly: false },
    ]);
  });

  it('takes the frontmatter and the <script> blocks of an .astro file', () => {
    const parts = astroScripts("---\nimport A from './A.astro';\n---\n<div>{'---'}</div>\n<script>\n  import { b } from './b';\n</script>\n");
    expect(parts.map((p) => specifiers(p).map((s) => s.specifier))).toEqual([['./A.astro'], ['./b']]);
  });

  const dir = mkdtempSync(join(tmpdir(), 'offsetry-import-graph-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('resolves files in a small tree and finds the cycle through an .astro page', () => {
    mkdirSync(join(dir, 'pages'), { recursive: true });
    mkdirSync(join(dir, 'db'), { recursive: true });
    writeFileSync(join(dir, 'pages', 'index.astro'), "---\nimport { x } from '../lib/x';\nimport { t } from '../db/schema';\n---\n<p>{x}</p>\n");
    mkdirSync(join(dir, 'lib'), { recursive: true });
    writeFileSync(join(dir, 'lib', 'x.ts'), "import { y } from './y.js';\nexport const x = y;\n");
    writeFileSync(join(dir, 'lib', 'y.ts'), "import page from '../pages/index.astro';\nexport const y = page;\n");
    writeFileSync(join(dir, 'db', 'schema.ts'), 'export const t = 1;\n');
    mkdirSync(join(dir, 'lib', 'server'), { recursive: true });
    writeFileSync(join(dir, 'lib', 'server', 'db.ts'), 'export const db = () => 1;\n');
    writeFileSync(join(dir, 'pages', 'health.ts'), "import { db } from '../lib/server/db';\nexport const GET = db;\n");
    const graph = buildImportGraph(dir);
    const cycles = findCycles(adjacency(graph)).map((c) => chain(c, dir));
    expect(cycles).toEqual([['lib/x.ts', 'lib/y.ts', 'pages/index.astro', 'lib/x.ts'].join(' → ')]);
    expect(pagesImportingDb(graph, dir).sort()).toEqual(['pages/health.ts → lib/server/db.ts', 'pages/index.astro → db/schema.ts']);
  });
});

/** Direct imports of src/db (the schema) or of the connection src/lib/server/db.ts from files under src/pages. */
function pagesImportingDb(graph: ReturnType<typeof buildImportGraph>, root: string): string[] {
  const pages = join(root, 'pages') + sep;
  const isDb = (to: string) => to.startsWith(join(root, 'db') + sep) || to === join(root, 'lib', 'server', 'db.ts');
  return [...graph].flatMap(([from, edges]) => (from.startsWith(pages) ? edges.filter((e) => isDb(e.to)).map((e) => `${relative(root, from)} → ${relative(root, e.to)}`) : []));
}

describe('src', () => {
  const graph = buildImportGraph(SRC);

  it('is read whole: pages, islands, server modules and the engine are all in the graph', () => {
    const files = [...graph.keys()].map((f) => relative(SRC, f));
    for (const f of ['middleware.ts', 'pages/index.astro', 'layouts/AppShell.astro', 'lib/server/session-intake.ts', 'lib/engine/fit.ts', 'components/FormErrors.tsx']) expect(files).toContain(f);
    // Frontmatter imports are followed: the home page imports its layout.
    expect(graph.get(join(SRC, 'pages/index.astro'))!.map((e) => relative(SRC, e.to))).toContain('layouts/AppShell.astro');
  });

  it('has no import cycle (type-only imports included)', () => {
    const cycles = findCycles(adjacency(graph)).map((c) => chain(c, SRC));
    expect(cycles, `import cycles:\n${cycles.join('\n')}`).toEqual([]);
  });

  it('has no file under src/pages importing src/db or the connection (database access goes through src/lib/server modules)', () => {
    expect(pagesImportingDb(graph, SRC)).toEqual([]);
  });
});
