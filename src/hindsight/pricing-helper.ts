/**
 * Worker-thread entry of the pricing helper (pricing-split.ts): each message is one
 * segment to serve; between segments it waits for the next message.
 */

import { parentPort } from 'node:worker_threads';

import { pairCostOf, quickPairCostOf } from './graph.js';
import { serveSegment, type HelperSetup } from './pricing-split.js';

const port = parentPort;
if (port !== null) {
  port.on('message', (setup: HelperSetup) => {
    serveSegment(setup, pairCostOf(setup.packed, setup.config), quickPairCostOf(setup.packed, setup.config, setup.quick));
  });
}
