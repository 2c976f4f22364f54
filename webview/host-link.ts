/**
 * The webview's end of the message channel: posts typed messages to the host, numbers requests,
 * and checks every incoming message before anyone sees it (malformed ones are dropped and logged).
 */
import { FromWebview, ToWebview, WebviewRequest, checkToWebview } from './protocol';

interface VsCodeApi {
  postMessage(message: unknown): void;
  getState(): unknown;
  setState(state: unknown): void;
}
declare function acquireVsCodeApi(): VsCodeApi;

/** Outside VS Code (a plain browser page) messages go to the parent window, state to memory. */
function fallbackApi(): VsCodeApi {
  let state: unknown;
  return {
    postMessage: (m) => window.parent?.postMessage(m, '*'),
    getState: () => state,
    setState: (s) => { state = s; },
  };
}

type Omit2<T, K extends keyof T> = T extends unknown ? Omit<T, K> : never;

export class HostLink {
  private readonly api: VsCodeApi;
  private nextId = 1;
  private readonly listeners: ((m: ToWebview) => void)[] = [];

  constructor() {
    this.api = typeof acquireVsCodeApi === 'function' ? acquireVsCodeApi() : fallbackApi();
    window.addEventListener('message', (e: MessageEvent) => {
      const checked = checkToWebview(e.data);
      if (!checked.ok) {
        this.post({ type: 'log', level: 'warning', message: `panel dropped a malformed message: ${checked.reason}`.slice(0, 2000) });
        return;
      }
      for (const l of this.listeners) l(checked.message);
    });
  }

  onMessage(listener: (m: ToWebview) => void): void { this.listeners.push(listener); }

  post(message: FromWebview): void { this.api.postMessage(message); }

  /** Sends a request with a fresh id and returns the id its answers will carry. */
  request(message: Omit2<WebviewRequest, 'id'>): number {
    const id = this.nextId++;
    this.post({ ...message, id } as WebviewRequest);
    return id;
  }

  loadState<T>(): Partial<T> {
    const s = this.api.getState();
    return typeof s === 'object' && s !== null ? (s as Partial<T>) : {};
  }

  saveState<T>(state: T): void { this.api.setState(state); }
}
