/**
 * Worker-thread entry of the pricing helper (pricing-split.ts): each message is one
 * job, a segment to serve or a build to run ahead of; between jobs it waits for the
 * next message.
 */

import { parentPort } from 'node:worker_threads';

import { pairCostOf, quickPairCostOf } from './graph.js';
import { prefault, serveSegment, type HelperSetup, type PrefaultJob } from './pricing-split.js';

const port = parentPort;
if (port !== null) {
  port.on('message', (job: HelperSetup | PrefaultJob) => {
    if (job.job === 'prefault') prefault(job);
    else serveSegment(job, pairCostOf(job.packed, job.config), quickPairCostOf(job.packed, job.config, job.quick));
  });
}
