// Injected before the panel loads: the webview global acquireVsCodeApi, posting to the scripted
// host (a Playwright binding), plus a record of Content-Security-Policy violations.
// Plain JS read as text, so the test runner's transpiler adds no helpers to it.
(() => {
  const violations = [];
  window.__cspViolations = violations;
  document.addEventListener('securitypolicyviolation', (e) => violations.push(`${e.violatedDirective} ${e.blockedURI}`));
  let state;
  let acquired = false;
  window.acquireVsCodeApi = () => {
    if (acquired) throw new Error('acquireVsCodeApi called twice');
    acquired = true;
    return {
      postMessage: (m) => window.__factfoilHost(m),
      getState: () => state,
      setState: (s) => { state = s; },
    };
  };
})();
