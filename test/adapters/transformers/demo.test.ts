// The demo runs on a transformer embedder when model files are on disk (issue: one option away).

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { afterAll, describe, expect, it } from 'vitest';
import { transformersEmbedder } from '../../../adapters/transformers/index.js';
import { buildTinyModel } from '../../../bench/lib/tiny-model.js';
import { runDemo } from '../../../cli/demo.js';

describe('demo with the transformers embedder', () => {
  const root = mkdtempSync(join(tmpdir(), 'tidemark-demo-model-'));
  afterAll(() => rmSync(root, { recursive: true, force: true }));

  it('runs the booking conversation and Friday still outranks Tuesday', async () => {
    const model = await buildTinyModel(root, { dim: 64 });
    const embedder = transformersEmbedder({ model: model.folder });
    await embedder.warmup();
    let text = '';
    const out = new Writable({ write(chunk, _enc, cb) { text += String(chunk); cb(); } });
    const r = await runDemo({ out, color: false, tidemark: { embedder } });
    expect(r.friday).toBe(true);
    expect(text).toContain(`embedder ${embedder.id}`);
    expect(text).toMatch(/1\. book a full service for Friday/);
  });
});
