/**
 * Audit action names: every action written in src/lib/server is `<entity>.<past-tense verb>` (e.g.
 * `unit.registered`, `fit.approved`) and has plain words for the history lists (src/lib/shared/audit-words.ts).
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join, relative, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { auditWords } from '../../src/lib/shared/audit-words';

const SERVER = resolve(__dirname, '../../src/lib/server');
const PATTERN = /^[a-z]+(?:_[a-z]+)*\.[a-z]+ed$/;

const files = (dir: string): string[] => readdirSync(dir, { withFileTypes: true }).flatMap((d) => (d.isDirectory() ? files(join(dir, d.name)) : d.name.endsWith('.ts') ? [join(dir, d.name)] : []));

/** The text of each `audit(tx, { … })` call: from its name to the balanced closing parenthesis. */
function auditCalls(source: string): string[] {
  const calls: string[] = [];
  for (const m of source.matchAll(/\baudit\(\s*\w+\s*,\s*\{/g)) {
    let depth = 0;
    for (let i = m.index!; i < source.length; i++) {
      const c = source[i];
      if (c === "'" || c === '"' || c === '`') i = source.indexOf(c, i + 1);
      else if (c === '(') depth++;
      else if (c === ')' && --depth === 0) {
        calls.push(source.slice(m.index!, i + 1));
        break;
      }
    }
  }
  return calls;
}

/** The `action:` values of audit() calls: each string literal of the expression, or the expression itself when it has none. */
export function auditActions(source: string): { names: string[]; unnamed: string[] } {
  const names: string[] = [];
  const unnamed: string[] = [];
  for (const call of auditCalls(source)) {
    const m = /\baction:\s*((?:'[^']*'|"[^"]*"|`[^`]*`|[^,'"`}])+)/.exec(call);
    if (!m) {
      unnamed.push(call.slice(0, 80));
      continue;
    }
    const expr = m[1]!.trim();
    const literals = [...expr.matchAll(/'([^']*)'|"([^"]*)"/g)].map((l) => l[1] ?? l[2]!);
    if (literals.length) names.push(...literals);
    else unnamed.push(expr);
  }
  return { names, unnamed };
}

describe('audit action names', () => {
  const found = files(SERVER).map((f) => ({ file: relative(SERVER, f), ...auditActions(readFileSync(f, 'utf8')) }));
  const all = found.flatMap((f) => f.names.map((name) => ({ file: f.file, name })));

  it('finds the actions of the server modules', () => {
    // A floor, so a change to the extraction that finds nothing fails here rather than passing below.
    expect(all.length).toBeGreaterThanOrEqual(20);
    expect(all.map((a) => a.name)).toEqual(expect.arrayContaining(['session.uploaded', 'unit.registered', 'arm_model.revised', 'fit.approved']));
  });

  it('are all literal names, never composed at run time', () => {
    expect(found.flatMap((f) => f.unnamed.map((u) => `${f.file}: action: ${u}`))).toEqual([]);
  });

  it('follow <entity>.<past-tense verb>', () => {
    expect(all.filter((a) => !PATTERN.test(a.name)).map((a) => `${a.file}: ${a.name}`)).toEqual([]);
  });

  it('each have words for the history list', () => {
    expect(all.filter((a) => auditWords(a.name) === a.name.replace(/[_.]/g, ' ')).map((a) => `${a.file}: ${a.name}`)).toEqual([]);
  });

  it('the checks refuse the old shapes', () => {
    for (const old of ['register', 'create', 'new_revision', 'drift.alert', 'fit.four_eyes_exception', 'compensation.done']) expect(PATTERN.test(old), old).toBe(false);
    expect(auditActions("audit(tx, { action: `${kind}.done` })").unnamed).toEqual(['`${kind}.done`']);
    expect(auditActions("audit(tx, { action: ok ? 'a.made' : 'a.lost' })").names).toEqual(['a.made', 'a.lost']);
  });
});
