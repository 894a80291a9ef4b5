// The look every chart panel shares, live or recorded: the panel box, its head with the title and the PNG
// button, and uPlot's own stylesheet (a page-level stylesheet cannot reach inside a shadow root).

import { css, unsafeCSS } from 'lit';
import uplotCss from 'uplot/dist/uPlot.min.css?inline';

export const chartPanelStyles = [
  unsafeCSS(uplotCss),
  css`
    :host {
      display: block;
      background: var(--db-panel);
      border: 1px solid var(--db-line);
      border-radius: 8px;
      padding: 0.5rem 0.6rem 0.3rem;
      min-width: 0;
    }
    .head {
      display: flex;
      align-items: baseline;
      font-size: 0.8rem;
    }
    .title {
      font-weight: 650;
      letter-spacing: 0.06em;
      text-transform: uppercase;
      color: var(--db-muted);
    }
    .plot {
      width: 100%;
    }
    .uplot {
      font-family: inherit;
    }
    .u-legend {
      font-size: 0.75rem;
    }
    .head .png {
      margin-left: auto;
      font: inherit;
      font-size: 0.72rem;
      padding: 0.1rem 0.45rem;
      border: 1px solid var(--db-line-strong);
      border-radius: 5px;
      background: var(--db-panel);
      color: var(--db-muted);
      cursor: pointer;
    }
  `,
];
