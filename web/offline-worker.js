// Spinney's service worker: keeps a copy of the page's own files in this browser so the page
// opens and works with the network off after one visit. It never sees the user's data (files
// are read in the page and its Web Worker, not fetched), and it fetches nothing but the
// page's own files. The file list and the build version are filled in after each build by
// scripts/offline_list.py (a Trunk hook); a new build gets a new cache and the old one goes.
//
// Network first, the kept copy when the network fails: online, every load is the current
// build, all of one version; offline, the copy of the last build this browser installed.
const VERSION = 'offline-build-version';
const FILES = ['offline-file-list'];
const CACHE = `spinney-${VERSION}`;

self.addEventListener('install', (event) => {
  event.waitUntil(
    caches.open(CACHE)
      .then((cache) => cache.addAll(FILES.map((f) => new Request(f, { cache: 'reload' }))))
      .then(() => self.skipWaiting()),
  );
});

self.addEventListener('activate', (event) => {
  event.waitUntil(
    caches.keys()
      .then((keys) => Promise.all(keys.filter((k) => k.startsWith('spinney-') && k !== CACHE).map((k) => caches.delete(k))))
      .then(() => self.clients.claim()),
  );
});

self.addEventListener('fetch', (event) => {
  const request = event.request;
  if (request.method !== 'GET' || new URL(request.url).origin !== self.location.origin) return;
  event.respondWith(
    fetch(request).catch(async () => {
      const cache = await caches.open(CACHE);
      const kept = await cache.match(request, { ignoreSearch: true })
        ?? (request.mode === 'navigate' ? await cache.match('./index.html') : undefined);
      return kept ?? Response.error();
    }),
  );
});
