// Autosave of notebooks in the browser's IndexedDB. Every change is saved
// (debounced); reopening the page offers to restore; several notebooks can be
// kept and deleted. Failures (storage full, private mode without IndexedDB)
// are reported to the caller, never swallowed.

const DB = "lensbook";
const STORE = "notebooks";

export interface Saved {
  id: string;
  title: string;
  savedAt: number; // ms since the epoch
  datasets: number;
  points: number;
  doc: string; // notebook document JSON
}

function open(): Promise<IDBDatabase> {
  return new Promise((resolve, reject) => {
    let req: IDBOpenDBRequest;
    try {
      req = indexedDB.open(DB, 1);
    } catch (e) {
      reject(new Error("browser storage is not available: " + String(e)));
      return;
    }
    req.onupgradeneeded = () => req.result.createObjectStore(STORE, { keyPath: "id" });
    req.onsuccess = () => resolve(req.result);
    req.onerror = () => reject(new Error("browser storage is not available: " + (req.error?.message ?? "unknown error")));
    req.onblocked = () => reject(new Error("browser storage is blocked by another tab of lensbook"));
  });
}

async function tx<T>(mode: IDBTransactionMode, f: (s: IDBObjectStore) => IDBRequest<T>): Promise<T> {
  const db = await open();
  try {
    return await new Promise<T>((resolve, reject) => {
      const t = db.transaction(STORE, mode);
      const r = f(t.objectStore(STORE));
      t.oncomplete = () => resolve(r.result);
      t.onerror = () => reject(t.error ?? r.error ?? new Error("storage error"));
      t.onabort = () => reject(t.error ?? new Error("storage transaction aborted (storage full?)"));
    });
  } finally {
    db.close();
  }
}

export function save(s: Saved): Promise<IDBValidKey> {
  return tx("readwrite", (st) => st.put(s));
}

export async function list(): Promise<Saved[]> {
  const all = await tx<Saved[]>("readonly", (st) => st.getAll());
  return all.sort((a, b) => b.savedAt - a.savedAt);
}

export function remove(id: string): Promise<undefined> {
  return tx("readwrite", (st) => st.delete(id));
}

/** A new notebook id for this page session. */
export function newId(): string {
  const b = new Uint8Array(8);
  crypto.getRandomValues(b);
  return Array.from(b, (x) => x.toString(16).padStart(2, "0")).join("");
}
