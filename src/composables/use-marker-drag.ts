/**
 * Drag a marker over an image with pointer events (mouse, pen and touch alike). Positions are
 * fractions (0..1) of the image's width and height from its top-left corner, as the API keeps
 * them, so they survive a re-upload at another resolution.
 */
export function useMarkerDrag(opts: {
  surface: () => HTMLElement | null;
  onMove: (id: number, x: number, y: number) => void;
  onDrop?: (id: number) => void;
}) {
  const clamp = (v: number) => Math.min(1, Math.max(0, v));
  let dragging: { id: number; pointer: number } | null = null;

  function at(e: PointerEvent): { x: number; y: number } | null {
    const el = opts.surface();
    if (!el) return null;
    const r = el.getBoundingClientRect();
    if (r.width === 0 || r.height === 0) return null;
    // Three decimals is a tenth of a percent: finer than a finger, and a short request.
    const round = (v: number) => Math.round(clamp(v) * 1000) / 1000;
    return { x: round((e.clientX - r.left) / r.width), y: round((e.clientY - r.top) / r.height) };
  }

  function start(id: number, e: PointerEvent) {
    if (e.button !== 0 && e.pointerType === 'mouse') return;
    e.preventDefault();
    (e.currentTarget as HTMLElement).setPointerCapture(e.pointerId);
    dragging = { id, pointer: e.pointerId };
  }

  function move(e: PointerEvent) {
    if (!dragging || e.pointerId !== dragging.pointer) return;
    const p = at(e);
    if (p) opts.onMove(dragging.id, p.x, p.y);
  }

  function end(e: PointerEvent) {
    if (!dragging || e.pointerId !== dragging.pointer) return;
    const id = dragging.id;
    dragging = null;
    opts.onDrop?.(id);
  }

  /** Arrow keys nudge a focused marker by 1 % (5 % with Shift), for keyboards and switch users. */
  function nudge(id: number, pos: { x: number; y: number }, e: KeyboardEvent) {
    const step = e.shiftKey ? 0.05 : 0.01;
    const d = { ArrowLeft: [-step, 0], ArrowRight: [step, 0], ArrowUp: [0, -step], ArrowDown: [0, step] }[e.key];
    if (!d) return;
    e.preventDefault();
    opts.onMove(id, Math.round(clamp(pos.x + d[0]) * 1000) / 1000, Math.round(clamp(pos.y + d[1]) * 1000) / 1000);
  }

  return { start, move, end, nudge };
}
