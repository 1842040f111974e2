// The turn path builds no object literal that opens with a spread and then adds fields the spread
// object does not have, nor one that writes new fields after a spread inside it. V8 in Node 20 adds
// each field after an opening spread on a slow path, about 1.5 µs a field (measured here with a
// micro-benchmark; a 13-field event cost 15–20 µs against 0.2 µs written out): the event payloads of
// one commit built that way cost 15 % of a whole in-process turn. Fields the spread object already
// has (`{ ...rec, strength }`) stay on the fast path and are allowed. A spread inside a literal
// (`{ a, ...(c ? { b } : {}), d }`) costs less, about 0.08 µs for each field after it (0.4 µs for five
// against 0.02 µs with the spread last), but the read builds one such object per slot and per
// returned item. This reads the types with the TypeScript checker, so it knows which fields are new.

import { dirname, join, relative } from 'node:path';
import { fileURLToPath } from 'node:url';
import ts from 'typescript';
import { describe, expect, it } from 'vitest';

const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');

/** Files every turn runs through (read, write, commit, events, the stores). */
const TURN_PATH = [
  'src/memory/attention.ts', 'src/memory/bm25.ts', 'src/memory/dates.ts', 'src/memory/extract.ts', 'src/memory/gate.ts',
  'src/memory/plan.ts', 'src/memory/prompt.ts', 'src/memory/rank.ts', 'src/memory/slots.ts', 'src/memory/text.ts',
  'src/memory/values.ts', 'src/memory/vector.ts', 'src/memory/write.ts',
  'src/middleware/core.ts', 'src/middleware/outbox.ts', 'src/middleware/read.ts', 'src/middleware/write.ts',
  'src/middleware/stream.ts', 'src/middleware/validate.ts', 'src/middleware/tidemark.ts',
  'src/logbook/index.ts', 'src/logbook/postings.ts', 'src/logbook/query.ts',
  'src/store/in-process.ts', 'src/embed/cache.ts', 'src/embed/hashing.ts', 'src/vectors/exact.ts',
  'src/metrics/retention.ts', 'src/metrics/survival.ts', 'src/deprecated-fields.ts',
  'adapters/redis/codec.ts', 'adapters/redis/keys.ts', 'adapters/redis/client.ts',
];

/** Functions that run once per instance or per run, not per turn. */
const ONCE = new Set(['constructor', 'connectUrl', 'withDeprecatedReplayFields']);

interface Finding {
  at: string;
  added: string[];
}

/** Literals `{ ...x, a, b }` in `files` whose later fields include some `x`'s type lacks. */
function openingSpreads(files: readonly string[]): Finding[] {
  const program = ts.createProgram(files.map((f) => join(root, f)), {
    target: ts.ScriptTarget.ES2022, module: ts.ModuleKind.NodeNext, moduleResolution: ts.ModuleResolutionKind.NodeNext, strict: true, noEmit: true, skipLibCheck: true,
  });
  const checker = program.getTypeChecker();
  const found: Finding[] = [];
  for (const file of files) {
    const src = program.getSourceFile(join(root, file));
    if (!src) throw new Error(`${file} not found`);
    const visit = (n: ts.Node): void => {
      if (ts.isConstructorDeclaration(n) || (ts.isFunctionDeclaration(n) && n.name && ONCE.has(n.name.text))) return;
      if (ts.isObjectLiteralExpression(n) && n.properties.length > 1) {
        const [first, ...rest] = n.properties;
        const added: string[] = [];
        if (first && ts.isSpreadAssignment(first)) {
          const spread = checker.getTypeAtLocation(first.expression);
          for (const p of rest) {
            if (ts.isSpreadAssignment(p)) {
              // A later spread adds every field of its type the first one lacks (an empty `{}` adds none).
              for (const q of checker.getTypeAtLocation(p.expression).getApparentProperties()) if (!spread.getProperty(q.name)) added.push(`...${q.name}`);
            } else if (p.name && !spread.getProperty(p.name.getText(src))) added.push(p.name.getText(src));
          }
        } else {
          // A spread inside the literal (`{ a, ...(c ? { b } : {}), d }`): the fields written after it
          // are added one by one too, about 0.08 µs each here against 0.003 µs written before it.
          const known = new Set<string>();
          let spreadSeen = false;
          for (const p of n.properties) {
            if (ts.isSpreadAssignment(p)) {
              spreadSeen = true;
              for (const q of checker.getTypeAtLocation(p.expression).getApparentProperties()) known.add(q.name);
            } else if (p.name) {
              const name = p.name.getText(src);
              if (spreadSeen && !known.has(name)) added.push(name);
              known.add(name);
            }
          }
        }
        if (added.length > 0) {
          const { line } = src.getLineAndCharacterOfPosition(n.getStart(src));
          found.push({ at: `${relative(root, src.fileName)}:${line + 1}`, added });
        }
      }
      ts.forEachChild(n, visit);
    };
    visit(src);
  }
  return found;
}

describe('object literals on the turn path', () => {
  it('none adds fields after a spread (a slow path in V8; see the file comment)', () => {
    expect(openingSpreads(TURN_PATH)).toEqual([]);
  });

  it('the check finds such a literal, and passes one that only overrides fields the spread has', () => {
    const dir = join(root, 'test', 'bench');
    const probe = ts.sys.resolvePath(join(dir, 'turn-path-literals.fixture.ts'));
    expect(openingSpreads([relative(root, probe)]).map((f) => [f.at.replace(/^.*:/, 'line '), f.added])).toEqual([
      ['line 7', ['outcome', 'slot']],
      ['line 9', ['...extra']],
      ['line 12', ['slot']],
    ]);
  });
});
