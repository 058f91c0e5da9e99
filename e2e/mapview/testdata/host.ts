// Minimal host page for the map-view browser tests: it plays the notebook's
// part (data, current model, Refine starting point, light-curve plot) so the
// panel can be tested on its own.
import { MapView, type MapData, type MapModel, type MapState } from "../../../web/mapview";

interface TestEvent {
  data: MapData[];
  model: MapModel;
}

const recv: number[] = []; // performance.now() at each state message
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
        recv.push(performance.now());
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
    frameAPI: () => (mv.frame.contentWindow as unknown as { lensMapView?: unknown }).lensMapView,
  };
}

void main();
