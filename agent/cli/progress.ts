/**
 * Progress on stderr for long work, only when stderr is a terminal; at most a few updates a second.
 */
export class Progress {
  private last = 0;
  private shown = false;
  constructor(
    private readonly label: string,
    private readonly enabled = process.stderr.isTTY === true,
  ) {}

  update(done: number, total: number, detail: string): void {
    if (!this.enabled) return;
    const now = Date.now();
    if (now - this.last < 250) return;
    this.last = now;
    // without a known total (endless work) only the detail is shown
    const pct =
      total > 0
        ? `${Math.min(100, (100 * done) / total)
            .toFixed(0)
            .padStart(3)} % `
        : '';
    process.stderr.write(`\r${this.label}: ${pct}${detail}\x1b[K`);
    this.shown = true;
  }

  done(): void {
    if (this.shown) process.stderr.write('\r\x1b[K');
  }
}
