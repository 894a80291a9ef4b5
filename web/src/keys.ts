// Space and Escape stop the motor from anywhere in the page.
//
// Decision on Space inside inputs: Space stops everywhere except in fields where people type words
// (text-like inputs, textareas, contenteditable). The dashboard has none today; a notes field added later
// must not stop the bench on every space. Number inputs and sliders take no spaces, so Space stops there
// too. Escape stops everywhere, always, including inside text fields.
//
// Space must not also "click" whatever button has focus (Arm, say): the browser activates a focused button
// on Space, so both keydown and keyup are cancelled.

const WORD_INPUT_TYPES = new Set(['text', 'search', 'email', 'url', 'password', 'tel']);

export type StopKey = 'Space' | 'Escape';

/** True where Space is typing, not a command. Looks through shadow roots via the composed path. */
export function isWordField(target: EventTarget | null): boolean {
  if (!target || typeof (target as Element).tagName !== 'string') return false;
  const el = target as HTMLElement;
  const tag = el.tagName.toLowerCase();
  if (tag === 'textarea') return true;
  if (tag === 'input') return WORD_INPUT_TYPES.has(((el as HTMLInputElement).type || 'text').toLowerCase());
  return el.isContentEditable === true;
}

function isSpace(e: KeyboardEvent): boolean {
  return e.code === 'Space' || e.key === ' ' || e.key === 'Spacebar';
}

export function installStopKeys(target: Document, onStop: (key: StopKey) => void): () => void {
  const origin = (e: KeyboardEvent) => e.composedPath()[0] ?? e.target;
  const down = (e: KeyboardEvent) => {
    if (e.key === 'Escape' || e.code === 'Escape') {
      e.preventDefault();
      // A held key repeats: one stop per press is enough (the daemon treats repeats as no-ops anyway).
      if (!e.repeat) onStop('Escape');
      return;
    }
    if (isSpace(e) && !isWordField(origin(e))) {
      e.preventDefault();
      e.stopPropagation();
      if (!e.repeat) onStop('Space');
    }
  };
  const up = (e: KeyboardEvent) => {
    if (isSpace(e) && !isWordField(origin(e))) {
      e.preventDefault();
      e.stopPropagation();
    }
  };
  // Capture phase on the document: runs before any element's own handler can swallow the key.
  target.addEventListener('keydown', down, true);
  target.addEventListener('keyup', up, true);
  return () => {
    target.removeEventListener('keydown', down, true);
    target.removeEventListener('keyup', up, true);
  };
}
