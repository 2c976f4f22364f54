/** Names the extension registers, shared with package.json's contributes (a test keeps them in step). */
export const COMMANDS = {
  explainImage: 'factfoil.explainImage',
  explainActiveImage: 'factfoil.explainActiveImage',
  openModel: 'factfoil.openModel',
  showLog: 'factfoil.showLog',
  restartEngine: 'factfoil.restartEngine',
  forgetModels: 'factfoil.forgetModelChoices',
} as const;

export const MODEL_EDITOR_VIEW_TYPE = 'factfoil.modelSummary';
export const PANEL_VIEW_TYPE = 'factfoil.panel';
