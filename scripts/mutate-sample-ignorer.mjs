// Stryker ignorer for scripts/mutate-sample.mjs: inside the ranges of the drawn mutants, skip every node that
// neither is a drawn mutant's node nor contains one, so a range does not also test all the mutants nested in it.
// The drawn locations come from the file named by TIDEMARK_MUTATE_SAMPLE (Babel positions: lines from 1).
import { PluginKind, declareValuePlugin } from '@stryker-mutator/api/plugin';
import { readFileSync } from 'node:fs';

const drawn = JSON.parse(readFileSync(process.env.TIDEMARK_MUTATE_SAMPLE, 'utf8'));
const before = (a, b) => a.line < b.line || (a.line === b.line && a.column <= b.column);

export const strykerPlugins = [
  declareValuePlugin(PluginKind.Ignore, 'tidemark-sample', {
    shouldIgnore(path) {
      const loc = path.node.loc;
      if (!loc) return undefined;
      const keep = drawn.some((d) => before(loc.start, d.start) && before(d.end, loc.end));
      return keep ? undefined : 'not drawn in this sample';
    },
  }),
];
