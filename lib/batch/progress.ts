// Progress on stderr: a bar on a terminal, plain lines otherwise (logs, CI, pipes).

import cliProgress from 'cli-progress';

export class Progress {
  private bar: cliProgress.SingleBar | null = null;
  private count: number;
  private readonly enabled: boolean;
  private readonly total: number;

  constructor(enabled: boolean, total: number, alreadyDone: number) {
    this.enabled = enabled;
    this.total = total;
    this.count = alreadyDone;
    if (!enabled) return;
    if (process.stderr.isTTY) {
      this.bar = new cliProgress.SingleBar(
        { format: 'panels {bar} {value}/{total} | {last}', stream: process.stderr, hideCursor: true, clearOnComplete: true },
        cliProgress.Presets.shades_classic,
      );
      this.bar.start(total, alreadyDone, { last: alreadyDone ? `${alreadyDone} kept from the earlier run` : '' });
    } else if (alreadyDone > 0) {
      process.stderr.write(`resuming: ${alreadyDone} of ${total} panels kept from the earlier run\n`);
    }
  }

  tick(panel: string, verdict: string, errors: string[]): void {
    this.count++;
    if (!this.enabled) {
      // one line per unusable photo, always
      for (const e of errors) process.stderr.write(`error: ${e}\n`);
      return;
    }
    if (this.bar) {
      this.bar.update(this.count, { last: `${panel} ${verdict}` });
      if (errors.length) {
        this.bar.stop();
        for (const e of errors) process.stderr.write(`error: ${e}\n`);
        this.bar.start(this.total, this.count, { last: `${panel} ${verdict}` });
      }
    } else {
      process.stderr.write(`[${this.count}/${this.total}] ${panel}: ${verdict}\n`);
      for (const e of errors) process.stderr.write(`error: ${e}\n`);
    }
  }

  done(): void {
    this.bar?.stop();
  }
}
