// Styles shared by the panels. Colours and sizes are custom properties set once on db-app (they inherit
// through shadow roots), so one place decides the look.
import { css } from 'lit';

export const panelStyles = css`
  :host {
    display: block;
    box-sizing: border-box;
    background: var(--db-panel);
    border: 1px solid var(--db-line);
    border-radius: 8px;
    padding: 0.75rem 0.9rem;
    color: var(--db-ink);
    min-width: 0;
  }
  * {
    box-sizing: border-box;
  }
  h2 {
    margin: 0 0 0.5rem;
    font-size: 0.8rem;
    font-weight: 650;
    letter-spacing: 0.06em;
    text-transform: uppercase;
    color: var(--db-muted);
  }
  * + h2 {
    margin-top: 0.9rem;
  }
  dl {
    display: grid;
    grid-template-columns: max-content 1fr;
    gap: 0.2rem 0.8rem;
    margin: 0;
    font-size: 0.9rem;
  }
  dt {
    color: var(--db-muted);
  }
  dd {
    margin: 0;
    font-variant-numeric: tabular-nums;
    overflow-wrap: anywhere;
  }
  .muted {
    color: var(--db-muted);
  }
  .note {
    font-size: 0.85rem;
    color: var(--db-muted);
    margin: 0.4rem 0 0;
  }
  .error {
    color: var(--db-danger);
    font-weight: 600;
  }
  button {
    font: inherit;
    font-weight: 600;
    padding: 0.45rem 0.9rem;
    border-radius: 6px;
    border: 1px solid var(--db-line-strong);
    background: var(--db-button);
    color: var(--db-ink);
    cursor: pointer;
  }
  button:hover:not(:disabled) {
    background: var(--db-button-hover);
  }
  button:disabled {
    opacity: 0.45;
    cursor: not-allowed;
  }
  button:focus-visible,
  input:focus-visible,
  select:focus-visible {
    outline: 3px solid var(--db-focus);
    outline-offset: 1px;
  }
  .badge {
    display: inline-block;
    padding: 0.1rem 0.55rem;
    border-radius: 999px;
    font-size: 0.8rem;
    font-weight: 700;
    letter-spacing: 0.03em;
    background: var(--db-line);
    color: var(--db-ink);
  }
  .badge.good {
    background: var(--db-good-bg);
    color: var(--db-good);
  }
  .badge.warn {
    background: var(--db-warn-bg);
    color: var(--db-warn);
  }
  .badge.bad {
    background: var(--db-danger-bg);
    color: var(--db-danger);
  }
`;

export const SERIES_COLOURS: Record<string, string> = {
  thrust: '#2458a6',
  voltage: '#6b3fa0',
  current: '#b4531b',
  power: '#a3245e',
  rpm: '#23744a',
  temp: '#7a5c12',
  torque: '#3b6470',
  out: '#55606e',
};

/** Labelled form fields, as every panel with inputs draws them (panels add their own widths). */
export const fieldStyles = css`
  label {
    display: grid;
    gap: 0.15rem;
    font-size: 0.8rem;
    color: var(--db-muted);
  }
  input,
  select,
  textarea {
    font: inherit;
    font-size: 0.9rem;
    padding: 0.3rem 0.4rem;
    border: 1px solid var(--db-line-strong);
    border-radius: 5px;
    background: var(--db-panel);
    color: var(--db-ink);
  }
`;
