// Minimal host page for the map-view browser tests: it plays the notebook's
// part (data, current model, Refine starting point, light-curve plot) so the
// panel can be tested on its own.
import { MapView, type MapData, type MapModel, type MapState } from "../../../web/mapview";

interface TestEvent {
  data: MapData[];
  model: MapModel;
}

const recv: number[] = []; // time (timeOrigin + now(), ms) of each state message
const refine: MapModel[] = [];

async function main(): Promise<void> {
  const ev = (await (await fetch("event.json")).json()) as TestEvent;
  const q = new URLSearchParams(location.search);
  const mode = q.get("mode") === "canvas" ? "canvas" : q.get("mode") === "webgl" ? "webgl" : undefined;
  let last: MapState | undefined;
  const mv = new MapView(
    document.getElementById("map-panel")!,
    {
      data: () => ev.data,
      model: () => ev.model,
      useAsStart: (m) => {
        refine.push(m);
      },
      showModel: (s) => {
        recv.push(performance.timeOrigin + performance.now());
        last = s;
      },
    },
    { mode },
  );
  (window as unknown as Record<string, unknown>).testHost = {
    mv,
    refine,
    recv,
    last: () => last,
    frameAPI: () => ((mv.frame as HTMLIFrameElement).contentWindow as unknown as { lensMapView?: unknown }).lensMapView,
    dragInPage: (x: number, y: number, dx: number, dy: number, n: number) => dragInPage(mv.frame, x, y, dx, dy, n),
  };
}

void main();

// dragInPage drags from frame CSS point (x, y) by (dx, dy) in n steps, one
// pointer move per animation frame, with events dispatched on the map's canvas
// (pointer events for the 2-D canvas program, mouse events for ebiten's).
// It resolves with the page's frame rate during the drag.
function dragInPage(frame: HTMLIFrameElement, x: number, y: number, dx: number, dy: number, n: number): Promise<{ fps: number }> {
  const doc = frame.contentDocument!;
  const cv = doc.querySelector("canvas")!;
  const pointer = new URL(frame.src).searchParams.get("mode") === "canvas"; // the canvas program listens to pointer events, ebiten to mouse events
  const send = (type: "down" | "move" | "up", px: number, py: number) => {
    const init = { clientX: px, clientY: py, button: 0, buttons: type === "up" ? 0 : 1, bubbles: true, cancelable: true };
    const W = frame.contentWindow as unknown as typeof globalThis;
    if (pointer) cv.dispatchEvent(new W.PointerEvent("pointer" + type, { ...init, pointerId: 1, isPrimary: true }));
    else cv.dispatchEvent(new W.MouseEvent("mouse" + type, init));
  };
  return new Promise((resolve) => {
    let i = 0;
    let t0 = 0;
    const step = (t: number) => {
      if (i === 0) {
        send("down", x, y);
        t0 = t;
      } else if (i <= n) {
        send("move", x + (dx * i) / n, y + (dy * i) / n);
      } else {
        send("up", x + dx, y + dy);
        resolve({ fps: ((n - 1) / (t - t0)) * 1000 });
        return;
      }
      i++;
      // hold the press for a few frames so ebiten's per-tick sampling sees it
      if (i === 1) setTimeout(() => requestAnimationFrame(step), 100);
      else requestAnimationFrame(step);
    };
    requestAnimationFrame(step);
  });
}
