// The virtual bench's physics must stay its own: a model calibrated against a bench that shares its formulas
// agrees with it by construction, and the "model within X % of the bench" figure would mean nothing. These
// checks read the source files themselves (DEVELOPERS.md, "The virtual bench and the model stay apart").

import { readdirSync, readFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const simDir = join(root, 'server', 'sim');
const modelDir = join(root, 'server', 'model');

const simFiles = readdirSync(simDir).filter((f) => f.endsWith('.ts'));

/** Every static import/export-from and dynamic import() of a file, with whether it is type-only. */
function importsOf(text: string): { spec: string; typeOnly: boolean; statement: string }[] {
  const out: { spec: string; typeOnly: boolean; statement: string }[] = [];
  const stat = /(^|\n)\s*(import|export)\s+(type\s+)?([^'";]*?)\s*from\s*['"]([^'"]+)['"]/g;
  for (const m of text.matchAll(stat)) {
    // `import { type A, type B } from` is type-only too when every name in the braces is marked.
    const names = m[4].trim();
    const braced = /^\{([\s\S]*)\}$/.exec(names);
    const allTyped = braced !== null && braced[1].split(',').map((s) => s.trim()).filter(Boolean).every((s) => s.startsWith('type '));
    out.push({ spec: m[5], typeOnly: m[3] !== undefined || allTyped, statement: m[0].trim() });
  }
  for (const m of text.matchAll(/import\(\s*['"]([^'"]+)['"]\s*\)/g)) out.push({ spec: m[1], typeOnly: false, statement: m[0] });
  for (const m of text.matchAll(/(^|\n)\s*import\s+['"]([^'"]+)['"]/g)) out.push({ spec: m[2], typeOnly: false, statement: m[0].trim() });
  return out;
}

const intoModel = (spec: string): boolean => spec.startsWith('.') && resolve(simDir, spec).startsWith(modelDir + '/');

describe('the virtual bench shares no code with the model', () => {
  it('finds the sim sources and reads their imports (the check below is not vacuous)', () => {
    expect(simFiles).toContain('truth.ts');
    const truth = importsOf(readFileSync(join(simDir, 'truth.ts'), 'utf8'));
    expect(truth.some((i) => intoModel(i.spec) && i.typeOnly)).toBe(true);
    // The parser sees a value import for what it is.
    expect(importsOf("import { ductCondition } from '../model/duct-losses.js';")[0].typeOnly).toBe(false);
    expect(importsOf("import { type A, b } from '../model/x.js';")[0].typeOnly).toBe(false);
    expect(importsOf("import { type A, type B } from '../model/x.js';")[0].typeOnly).toBe(true);
    expect(importsOf("const m = await import('../model/index.js');")[0].typeOnly).toBe(false);
  });

  for (const file of simFiles) {
    it(`server/sim/${file} imports nothing but types from server/model`, () => {
      const bad = importsOf(readFileSync(join(simDir, file), 'utf8')).filter((i) => intoModel(i.spec) && !i.typeOnly);
      expect(bad.map((i) => i.statement)).toEqual([]);
    });
  }

  it("the truth's duct has none of the model's duct formulas or names", () => {
    const truth = readFileSync(join(simDir, 'truth.ts'), 'utf8');
    // The model's ducted momentum ratio 1 / sqrt(2 sigma) and its loss names.
    expect(truth).not.toMatch(/sqrt\(\s*2\s*\*\s*sigma/i);
    for (const name of ['tipGapLoss', 'lipLoss', 'diffuserRealisation', 'shroudRealisation', 'lossCoefficient', 'realisedSigma', 'stallFraction', 'INLET_K']) {
      expect(truth, name).not.toContain(name);
    }
    // Names exported by the model's duct module do not appear anywhere in the bench.
    const exported = [...readFileSync(join(modelDir, 'duct-losses.ts'), 'utf8').matchAll(/export (?:function|const) (\w+)/g)].map((m) => m[1]);
    expect(exported.length).toBeGreaterThan(3);
    for (const file of simFiles) {
      const text = readFileSync(join(simDir, file), 'utf8');
      for (const name of exported) expect(text, `${file} uses ${name}`).not.toMatch(new RegExp(`\\b${name}\\b`));
    }
  });
});
