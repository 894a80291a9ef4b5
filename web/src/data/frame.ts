// Coalesces redraw requests to at most one per animation frame: samples arrive in bursts (a batch every
// 50 ms, several messages per batch after a stall) and each must not cost a full chart draw.

export type FrameRequest = (cb: () => void) => number;
export type FrameCancel = (handle: number) => void;

export class FrameCoalescer {
  private _handle: number | null = null;

  constructor(
    private readonly _draw: () => void,
    private readonly _request: FrameRequest = (cb) => requestAnimationFrame(cb),
    private readonly _cancel: FrameCancel = (h) => cancelAnimationFrame(h),
  ) {}

  get pending(): boolean {
    return this._handle !== null;
  }

  schedule(): void {
    if (this._handle !== null) return;
    this._handle = this._request(() => {
      this._handle = null;
      this._draw();
    });
  }

  cancel(): void {
    if (this._handle === null) return;
    this._cancel(this._handle);
    this._handle = null;
  }
}
