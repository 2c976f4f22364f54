/**
 * The one error type for the user's mistakes: a bad file, an unknown class, an unsupported op.
 * It carries a one-line message and an optional hint saying what to do. The CLI maps it to
 * exit code 2, the panel to a message. Anything else thrown is a bug and is logged with its stack.
 */
export class UserError extends Error {
  constructor(message: string, readonly hint?: string) {
    super(message);
    this.name = 'UserError';
  }

  /** The message and hint on one line, as the CLI prints it. */
  oneLine(): string {
    return this.hint ? `${this.message} (${this.hint})` : this.message;
  }
}

export function isUserError(e: unknown): e is UserError {
  return e instanceof UserError;
}
