/**
 * Progress on a terminal: one line on stderr, rewritten in place, shown only when stderr is a TTY
 * and the work has already taken more than a second (short commands stay quiet, and pipes and CI
 * logs never see control characters).
 */
export interface Progress {
  update(label: string, done: number, total: number): void;
  done(): void;
}

export function terminalProgress(stream: NodeJS.WriteStream = process.stderr, delayMs = 1000): Progress {
  const start = Date.now();
  let shown = false;
  let last = 0;
  return {
    update(label, done, total) {
      if (!stream.isTTY) return;
      const now = Date.now();
      if (now - start < delayMs || (now - last < 100 && done < total)) return;
      last = now;
      shown = true;
      const pct = total > 0 ? Math.floor((100 * done) / total) : 0;
      stream.write(`\r\x1b[2K${label} ${pct}% (${done}/${total})`);
    },
    done() {
      if (shown && stream.isTTY) stream.write('\r\x1b[2K');
      shown = false;
    },
  };
}
