import { LitElement, css, html } from 'lit';

/** Always on screen (sticky at the top): the dashboard is no substitute for a safe bench. */
export class DbCautionBanner extends LitElement {
  static override styles = css`
    :host {
      display: block;
      background: var(--db-caution-bg);
      color: var(--db-caution-ink);
      border-bottom: 2px solid var(--db-caution-line);
      font-size: 0.85rem;
      line-height: 1.35;
    }
    div {
      padding: 0.4rem 1rem;
      display: flex;
      flex-wrap: wrap;
      gap: 0.15rem 1.1rem;
      align-items: baseline;
    }
    strong {
      letter-spacing: 0.05em;
      text-transform: uppercase;
    }
    span::before {
      content: '▸ ';
      opacity: 0.7;
    }
    /* A phone has little height to spare: let the items run on as one paragraph in smaller type. */
    @media (max-width: 640px) {
      :host {
        font-size: 0.72rem;
        line-height: 1.3;
      }
      div {
        display: block;
        padding: 0.3rem 0.6rem;
      }
      span::before {
        content: ' · ';
      }
      strong + span::before {
        content: ' ';
      }
    }
  `;

  override render() {
    return html`<div role="note" aria-label="Safety">
      <strong>Caution</strong>
      <span>Keep out of the rotor plane</span>
      <span>Wear eye protection</span>
      <span>Stand and propeller secured before power-up</span>
      <span>Batteries supervised, in a fire-safe place</span>
      <span>This software stop does not replace a hard-wired power cut in the supply line</span>
      <span>Follow local codes and lab rules</span>
    </div>`;
  }
}
customElements.define('db-caution-banner', DbCautionBanner);
