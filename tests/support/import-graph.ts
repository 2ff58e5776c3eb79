/**
 * The import graph of the source tree, built with the TypeScript compiler's parser: every static import,
 * re-export (`export … from`) and dynamic `import()` with a literal specifier, in .ts/.tsx/.mjs files and in
 * the frontmatter and <script> blocks of .astro files. Relative specifiers and the `~/` alias are resolved
 * to files; package imports are left out (they cannot close a cycle inside src).
 */
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import ts from 'typescript';

export interface ImportEdge {
  /** The file imported (absolute path). */
  to: string;
  specifier: string;
  /** `import type` / `export type`: erased at build time. */
  typeOnly: boolean;
}

export type ImportGraph = Map<string, ImportEdge[]>;

const SOURCE = /\.(ts|tsx|mts|mjs|js|astro)$/;
const EXTENSIONS = ['', '.ts', '.tsx', '.mts', '.mjs', '.js', '.astro', '/index.ts', '/index.tsx', '/index.mjs', '/index.js'];

/** The script parts of an .astro file: the frontmatter between the leading `---` fences and each <script>. */
export function astroScripts(text: string): string[] {
  const parts: string[] = [];
  const front = /^\s*---\r?\n([\s\S]*?)\r?\n---/.exec(text);
  if (front) parts.push(front[1]!);
  for (const m of text.matchAll(/<script\b[^>]*>([\s\S]*?)<\/script>/g)) parts.push(m[1]!);
  return parts;
}

/** Every module specifier a script names, with whether the import is type-only. */
export function specifiers(code: string, fileName = 'file.ts'): { specifier: string; typeOnly: boolean }[] {
  const kind = fileName.endsWith('.tsx') ? ts.ScriptKind.TSX : ts.ScriptKind.TS;
  const source = ts.createSourceFile(fileName, code, ts.ScriptTarget.Latest, false, kind);
  const out: { specifier: string; typeOnly: boolean }[] = [];
  const visit = (node: ts.Node) => {
    if (ts.isImportDeclaration(node) && ts.isStringLiteral(node.moduleSpecifier)) {
      const clause = node.importClause;
      const typeOnly =
        !!clause &&
        (clause.isTypeOnly ||
          (!clause.name && !!clause.namedBindings && ts.isNamedImports(clause.namedBindings) && clause.namedBindings.elements.length > 0 && clause.namedBindings.elements.every((e) => e.isTypeOnly)));
      out.push({ specifier: node.moduleSpecifier.text, typeOnly });
    } else if (ts.isExportDeclaration(node) && node.moduleSpecifier && ts.isStringLiteral(node.moduleSpecifier)) {
      out.push({ specifier: node.moduleSpecifier.text, typeOnly: node.isTypeOnly });
    } else if (ts.isCallExpression(node) && node.expression.kind === ts.SyntaxKind.ImportKeyword && node.arguments[0] && ts.isStringLiteralLike(node.arguments[0])) {
      out.push({ specifier: node.arguments[0].text, typeOnly: false });
    }
    ts.forEachChild(node, visit);
  };
  visit(source);
  return out;
}

function resolveSpecifier(from: string, specifier: string, srcRoot: string): string | undefined {
  let base: string;
  if (specifier.startsWith('.')) base = resolve(dirname(from), specifier);
  else if (specifier.startsWith('~/')) base = resolve(srcRoot, specifier.slice(2));
  else return undefined;
  const candidates = EXTENSIONS.map((e) => base + e);
  // `./x.js` written for `./x.ts`
  if (/\.(m?js)$/.test(base)) candidates.push(base.replace(/\.(m?js)$/, '.ts'), base.replace(/\.(m?js)$/, '.tsx'));
  return candidates.find((c) => existsSync(c) && statSync(c).isFile());
}

function walk(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((d) => {
    const p = join(dir, d.name);
    return d.isDirectory() ? walk(p) : SOURCE.test(d.name) && !d.name.endsWith('.d.ts') ? [p] : [];
  });
}

/** The import graph of every source file below `srcRoot` (absolute paths); JSON, CSS and packages are left out. */
export function buildImportGraph(srcRoot: string): ImportGraph {
  const root = resolve(srcRoot);
  const graph: ImportGraph = new Map();
  for (const file of walk(root)) {
    const text = readFileSync(file, 'utf8');
    const scripts = file.endsWith('.astro') ? astroScripts(text) : [text];
    const edges: ImportEdge[] = [];
    for (const code of scripts) {
      for (const { specifier, typeOnly } of specifiers(code, file.endsWith('.astro') ? 'frontmatter.ts' : file)) {
        const to = resolveSpecifier(file, specifier, root);
        if (to && SOURCE.test(to)) edges.push({ to, specifier, typeOnly });
      }
    }
    graph.set(file, edges);
  }
  return graph;
}

/**
 * Import cycles, found by a depth-first walk: each back edge closes one, so a graph has a cycle exactly when
 * this list is not empty (at least one chain for every group of files that import each other in a circle,
 * not every possible loop). A chain starts at its smallest node, so a → b → a and b → a → b are one, and
 * repeats its first node at the end.
 */
export function findCycles(graph: ReadonlyMap<string, readonly string[]>): string[][] {
  const state = new Map<string, 'open' | 'done'>();
  const stack: string[] = [];
  const seen = new Set<string>();
  const cycles: string[][] = [];
  const visit = (node: string) => {
    state.set(node, 'open');
    stack.push(node);
    for (const next of graph.get(node) ?? []) {
      const s = state.get(next);
      if (s === 'open') {
        const loop = stack.slice(stack.indexOf(next));
        // Rotate to start at the smallest node so the same loop found from elsewhere is recognised.
        const k = loop.indexOf([...loop].sort()[0]!);
        const canonical = [...loop.slice(k), ...loop.slice(0, k)];
        const key = canonical.join('\n');
        if (!seen.has(key)) {
          seen.add(key);
          cycles.push([...canonical, canonical[0]!]);
        }
      } else if (s === undefined) visit(next);
    }
    stack.pop();
    state.set(node, 'done');
  };
  for (const node of [...graph.keys()].sort()) if (!state.has(node)) visit(node);
  return cycles;
}

/** The graph as plain adjacency lists; type-only edges are kept unless `runtimeOnly`. */
export function adjacency(graph: ImportGraph, runtimeOnly = false): Map<string, string[]> {
  return new Map([...graph].map(([from, edges]) => [from, [...new Set(edges.filter((e) => !runtimeOnly || !e.typeOnly).map((e) => e.to))]]));
}

export const chain = (nodes: string[], root: string) => nodes.map((n) => relative(root, n)).join(' → ');
