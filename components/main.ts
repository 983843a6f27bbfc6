// The workbench's entry: registers the elements (importing the shell pulls in every
// screen) and the offline cache. Everything else starts inside <spanwright-app>.
import './spanwright-app.js';

if ('serviceWorker' in navigator && location.protocol !== 'file:') {
  navigator.serviceWorker.register('./sw.js', { type: 'module' }).catch((err: unknown) => {
    // the workbench still runs online without its offline cache
    console.warn(`offline cache not installed: ${(err as Error).message}`);
  });
}
