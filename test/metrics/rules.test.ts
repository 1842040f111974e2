// The shipped Prometheus rules (ops/prometheus) checked and unit-tested with promtool, the Prometheus
// project's own tool (Debian package `prometheus`; scripts/ensure-prometheus.sh installs it in CI), and
// the runbook kept in step: a section per alert.

import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const PROMTOOL = '/usr/bin/promtool';
const OPS = fileURLToPath(new URL('../../ops/prometheus/', import.meta.url));
const RUNBOOK = fileURLToPath(new URL('../../docs/runbook.md', import.meta.url));
const run = existsSync(PROMTOOL) || process.env.CI === 'true' ? describe : describe.skip;

const alertNames = (): string[] => [...readFileSync(`${OPS}tidemark-rules.yml`, 'utf8').matchAll(/^\s*- alert: (\w+)$/gm)].map((m) => m[1]!);

run('shipped Prometheus rules', () => {
  it('pass promtool check rules', () => {
    const out = execFileSync(PROMTOOL, ['check', 'rules', `${OPS}tidemark-rules.yml`], { encoding: 'utf8' });
    expect(out).toMatch(/SUCCESS: 35 rules found/);
  });

  it('pass their promtool unit tests (each alert fires on its case and stays quiet under its threshold)', () => {
    // promtool resolves rule_files relative to the test file's folder.
    const out = execFileSync(PROMTOOL, ['test', 'rules', 'tidemark-rules.test.yml'], { cwd: OPS, encoding: 'utf8' });
    expect(out).toMatch(/SUCCESS/);
  });

  it('have a unit test and a runbook section for every alert', () => {
    const names = alertNames();
    expect(names).toEqual(['TidemarkStoreDown', 'TidemarkDegradedReads', 'TidemarkOutboxBacklog', 'TidemarkOutboxOverflow', 'TidemarkSlowCommits', 'TidemarkErrors', 'TidemarkEvictionStorm']);
    const tests = readFileSync(`${OPS}tidemark-rules.test.yml`, 'utf8');
    const runbook = readFileSync(RUNBOOK, 'utf8');
    for (const name of names) {
      expect(tests).toMatch(new RegExp(`alertname: ${name}\\n\\s+exp_alerts:\\n\\s+- exp_labels`));
      expect(runbook).toMatch(new RegExp(`^## ${name}$`, 'm'));
    }
  });
});
