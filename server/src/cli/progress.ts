// A progress bar on stderr, only on a terminal, never under CI, and only once a scan has run longer than a second.
export class Progress {
  private readonly started = Date.now();
  private shown = false;
  private lastDraw = 0;

  constructor(private readonly stream: { isTTY?: boolean; write(s: string): unknown; columns?: number }, private readonly env: NodeJS.ProcessEnv, private readonly delayMs = 1000) {}

  private get enabled(): boolean {
    return !!this.stream.isTTY && !this.env.CI;
  }

  update(phase: string, done: number, total: number): void {
    if (!this.enabled) return;
    const now = Date.now();
    if (now - this.started < this.delayMs || (now - this.lastDraw < 100 && done < total)) return;
    this.lastDraw = now;
    this.shown = true;
    const width = 30;
    const filled = total ? Math.round((done / total) * width) : width;
    const line = `${phase.padEnd(10)} [${'#'.repeat(filled)}${' '.repeat(width - filled)}] ${done}/${total}`;
    this.stream.write(`\r${line.slice(0, (this.stream.columns ?? 80) - 1)}\x1b[K`);
  }

  done(): void {
    if (this.shown) this.stream.write('\r\x1b[K');
    this.shown = false;
  }
}
