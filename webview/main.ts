/** Entry point of the panel bundle (dist/webview.js): connect to the host and mount the panel. */
import { HostLink } from './host-link';
import { Panel } from './panel';

function start(): void {
  const mount = document.getElementById('factfoil') ?? document.body;
  new Panel(new HostLink(), mount);
}

if (document.readyState === 'loading') document.addEventListener('DOMContentLoaded', start, { once: true });
else start();
