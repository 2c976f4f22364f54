/** Entry point of the panel bundle (dist/webview.js): connect to the host and mount the panel. */
import { HostLink } from './host-link';
import { Panel } from './panel';
import { TrustView } from './view/trust';

function start(): void {
  const mount = document.getElementById('factfoil') ?? document.body;
  const link = new HostLink();
  const panel = new Panel(link, mount);
  // The trust checks sit below the panel and follow its question (layer, fact, foil).
  const trust = new TrustView(link, () => panel.currentQuestion());
  mount.append(trust.root);
  const question = mount.querySelector('.ff-question');
  if (question) new MutationObserver(() => trust.refresh()).observe(question, { subtree: true, childList: true, characterData: true });
}

if (document.readyState === 'loading') document.addEventListener('DOMContentLoaded', start, { once: true });
else start();
