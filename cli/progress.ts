// A one-line progress bar on stderr for long replays and sweeps. It draws only when stderr is a
// terminal, at most ~10 times a second, so piped output and logs stay clean.

export interface Progress {
  tick(done: number): void;
  done(): void;
}

const NOOP: Progress = { tick: () => undefined, done: () => undefined };

/** A progress bar for `total` steps, or a no-op when `stream` is not a TTY or total is small. */
export function progressBar(total: number, label: string, stream: NodeJS.WriteStream = process.stderr, minTotal = 2000): Progress {
  if (!stream.isTTY || total < minTotal) return NOOP;
  const width = 30;
  const t0 = performance.now();
  let last = 0;
  const draw = (done: number): void => {
    const f = Math.min(1, done / total);
    const filled = Math.round(f * width);
    const rate = done / Math.max(1e-3, (performance.now() - t0) / 1000);
    stream.write(`\r${label} [${'#'.repeat(filled)}${'.'.repeat(width - filled)}] ${Math.round(f * 100)}% ${Math.round(rate)}/s `);
  };
  return {
    tick(done: number): void {
      const now = performance.now();
      if (now - last < 100 && done < total) return;
      last = now;
      draw(done);
    },
    done(): void {
      draw(total);
      stream.write('\n');
    },
  };
}
