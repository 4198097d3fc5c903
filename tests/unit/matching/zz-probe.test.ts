import { it } from 'vitest';
import { solveSparse, checkCertificate } from '../../../src/matching/index.js';
import { WindowSequence } from './gen.js';
it('probe', () => {
  for (const commit of ['due'] as const) for (const replace of [0.2, 0.5]) {
    const seq = new WindowSequence(3, { nDemand: 2000, nSupply: 2000, k: 20, replace, commit, waitPerStep: 0.3, defer: 4 });
    for (let t = 0; t < 6; t++) {
      const rc = solveSparse(seq.inst);
      const rw = solveSparse(seq.inst, seq.warm ? { warm: seq.warm } : {});
      const given = seq.warm ? seq.warm.rowToCol!.filter((x) => x >= 0).length : 0;
      if (Math.abs(rc.cost - rw.cost) > 1e-9 * Math.abs(rc.cost)) throw new Error('cost differs ' + rc.cost + ' ' + rw.cost);
      if (!checkCertificate(seq.inst, rw).ok) throw new Error('cert');
      console.log(commit, replace, t, 'given', given, 'cold', JSON.stringify(rc.stats), 'warm', JSON.stringify(rw.stats));
      seq.advance(rw);
    }
  }
});
