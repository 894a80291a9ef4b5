// The reference firmware's protocol table is generated from the declaration in messages.ts; the committed C++
// must be exactly what the generator writes, so a field added to the protocol cannot be forgotten in C++.
// DUCTBENCH_WRITE_FW_TABLE=1 rewrites the files.

import { readFileSync, writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { renderIdsHeader, renderTableSource } from '../firmware-protocol/firmware/tools/protocol-table.js';
import { MESSAGES } from '../firmware-protocol/src/messages.js';

const core = (name: string): string => fileURLToPath(new URL(`../firmware-protocol/firmware/core/${name}`, import.meta.url));

describe('firmware protocol table', () => {
  for (const [file, render] of [
    ['protocol_ids.h', renderIdsHeader],
    ['protocol_table.cpp', renderTableSource],
  ] as const) {
    it(`${file} equals what protocol-table.ts renders from messages.ts`, () => {
      const want = render();
      if (process.env.DUCTBENCH_WRITE_FW_TABLE === '1') writeFileSync(core(file), want);
      expect(readFileSync(core(file), 'utf8')).toBe(want);
    });
  }

  it('names every message and field of the declaration', () => {
    const ids = renderIdsHeader();
    for (const [tag, spec] of Object.entries(MESSAGES)) {
      expect(ids).toContain(`MSG_${tag},`);
      for (const f of spec.fields) expect(ids).toContain(`F_${tag}_${f.key.toUpperCase()} =`);
    }
  });
});
