// The workbench's service worker (built as dist/sw.js): keeps the app shell, the tfjs
// wasm binaries and the demo data in the Cache API, so the workbench opens and works
// offline after its first load. Nothing here reaches another origin: only same-origin
// GET requests are answered, everything else passes through untouched.
//
//   install   store every file listed in precache.json (written by vite.config.ts)
//   activate  take control of open pages at once
//   fetch     pages and unhashed files: network first, the cache when offline;
//             hashed build files (assets/…): the cache first, they never change
const worker = self as unknown as ServiceWorkerGlobalScope;
const CACHE = 'spanwright-app';

worker.addEventListener('install', (event) => {
  event.waitUntil(
    (async () => {
      const response = await fetch('precache.json', { cache: 'no-store' });
      const list = (await response.json()) as { files: string[] };
      const cache = await caches.open(CACHE);
      await cache.addAll(list.files);
      await worker.skipWaiting();
    })(),
  );
});

worker.addEventListener('activate', (event) => {
  event.waitUntil(worker.clients.claim());
});

worker.addEventListener('fetch', (event) => {
  const request = event.request;
  const url = new URL(request.url);
  if (request.method !== 'GET' || url.origin !== worker.location.origin) return;
  const hashed = url.pathname.includes('/assets/');
  event.respondWith(hashed ? cacheFirst(request) : networkFirst(request));
});

async function cacheFirst(request: Request): Promise<Response> {
  const cache = await caches.open(CACHE);
  const hit = await cache.match(request);
  if (hit) return hit;
  const response = await fetch(request);
  if (response.ok) await cache.put(request, response.clone());
  return response;
}

async function networkFirst(request: Request): Promise<Response> {
  const cache = await caches.open(CACHE);
  try {
    const response = await fetch(request);
    if (response.ok) await cache.put(request, response.clone());
    return response;
  } catch (err) {
    const hit = (await cache.match(request, { ignoreSearch: true })) ?? (request.mode === 'navigate' ? await cache.match('./') : undefined);
    if (hit) return hit;
    throw err;
  }
}
