import { SystemClock } from '../../src/clock/system-clock.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import { clockContract } from './clock.contract.js';

// The clock port's contract against both implementations: the system's (time really passes) and
// the manual one of the tests (time passes when told).

clockContract('SystemClock', () => ({ clock: new SystemClock(), pass: (ms) => new Promise((resolve) => setTimeout(resolve, ms)) }));
clockContract('ManualClock', () => {
  const clock = new ManualClock();
  return {
    clock,
    pass: async (ms) => clock.advance(ms),
  };
});
