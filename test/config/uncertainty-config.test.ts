import { describe, expect, it } from 'vitest';
import { conformityProblems, readConformity, readTypeBComponents, typeBProblems } from '../../src/config/uncertainty-config.js';
import { ConfigReader } from '../../src/config/config-reader.js';
import { evaluateTypeB } from '../../src/core/uncertainty/type-b-component.js';

const P = 'channels.defaults.typeB';
const C = 'channels.groups[0].conformity';

describe('Type B components in configuration: one line per problem naming the key path', () => {
  it('a valid list reads into specs that evaluate', () => {
    const reader = new ConfigReader();
    const specs = readTypeBComponents(
      [
        { name: 'reference PRT certificate', kind: 'certificate', expanded: 0.012, coverageFactor: 2, shared: 'prt-ref' },
        { name: 'display', kind: 'resolution', step: 0.01 },
        { name: 'drift', kind: 'drift', rate: 0.001, elapsed: 12 },
        { name: 'bath', kind: 'stability', halfWidth: 0.005, reliability: 0.25 },
        { name: 'immersion', kind: 'installation', halfWidth: 0.01, shape: 'triangular' },
        { name: 'other', kind: 'normal', expanded: 0.004, coverageFactor: 2, dof: 12 },
      ],
      P,
      reader,
    );
    expect(reader.problems).toEqual([]);
    expect(specs).toHaveLength(6);
    expect(specs.map((s) => evaluateTypeB(s).standardUncertainty)[0]).toBeCloseTo(0.006, 15);
  });

  it('missing value', () => {
    expect(typeBProblems([{ name: 'bath', kind: 'stability' }], P)).toEqual([`${P}[0].halfWidth: missing: the half-width of the source's stability or uniformity`]);
    expect(typeBProblems([{ kind: 'resolution', step: 0.1 }], P)).toEqual([`${P}[0].name: missing: the component needs a name`]);
    expect(typeBProblems([{ name: 'cert', kind: 'certificate', expanded: 0.1 }], P)).toEqual([`${P}[0]: missing: coverageFactor (k) or confidence (coverage probability) of the certificate`]);
  });

  it('negative value', () => {
    expect(typeBProblems([{ name: 'cycle', kind: 'rectangular', halfWidth: -0.2 }], P)).toEqual([`${P}[0].halfWidth: expected a number at least 0, got -0.2`]);
    expect(typeBProblems([{ name: 'cert', kind: 'certificate', expanded: -1, coverageFactor: 2 }], P)).toEqual([`${P}[0].expanded: expected a number at least 0, got -1`]);
    expect(typeBProblems([{ name: 'display', kind: 'resolution', step: -0.01 }], P)).toEqual([`${P}[0].step: expected a number above 0, got -0.01`]);
  });

  it('unknown kind', () => {
    expect(typeBProblems([{ name: 'x', kind: 'trapezoidal', halfWidth: 1 }], P)).toEqual([
      `${P}[0].kind: unknown kind "trapezoidal" (expected one of certificate, resolution, drift, stability, installation, rectangular, triangular, u-shaped, normal)`,
    ]);
  });

  it('unknown keys, both dof and reliability, both k and p, a duplicate name, a list expected', () => {
    expect(typeBProblems([{ name: 'd', kind: 'resolution', step: 0.1, halfWidth: 1 }], P)).toEqual([
      `${P}[0].halfWidth: unknown key (expected one of name, kind, shared, sensitivity, dof, reliability, estimate, step)`,
    ]);
    expect(typeBProblems([{ name: 'd', kind: 'rectangular', halfWidth: 1, dof: 4, reliability: 0.1 }], P)).toEqual([`${P}[0].reliability: give dof or reliability, not both`]);
    expect(typeBProblems([{ name: 'c', kind: 'certificate', expanded: 1, coverageFactor: 2, confidence: 0.95 }], P)).toEqual([`${P}[0]: give coverageFactor or confidence, not both`]);
    expect(
      typeBProblems(
        [
          { name: 'd', kind: 'resolution', step: 0.1 },
          { name: 'd', kind: 'resolution', step: 0.2 },
        ],
        P,
      ),
    ).toEqual([`${P}[1].name: "d" is already used by another component of this list`]);
    expect(typeBProblems({ name: 'd' }, P)).toEqual([`${P}: expected a list, got a mapping`]);
  });

  it('several problems: one line each', () => {
    const lines = typeBProblems(
      [
        { name: 'a', kind: 'rectangular', halfWidth: -1 },
        { name: 'b', kind: 'nope' },
        { name: 'c', kind: 'certificate', expanded: 0.1, confidence: 1.5 },
      ],
      P,
    );
    expect(lines).toEqual([
      `${P}[0].halfWidth: expected a number at least 0, got -1`,
      `${P}[1].kind: unknown kind "nope" (expected one of certificate, resolution, drift, stability, installation, rectangular, triangular, u-shaped, normal)`,
      `${P}[2].confidence: expected a number between 0 and 1, got 1.5`,
    ]);
  });
});

describe('specification limits and decision rule in configuration', () => {
  it('valid: two-sided guarded with r = 1 by default; one-sided simple', () => {
    const reader = new ConfigReader();
    expect(readConformity({ lower: 19.5, upper: 20.5, rule: 'guarded' }, C, reader)).toEqual({ limits: { lower: 19.5, upper: 20.5 }, rule: { kind: 'guarded', guardFactor: 1 } });
    expect(readConformity({ upper: 0.3 }, C, reader)).toEqual({ limits: { lower: null, upper: 0.3 }, rule: { kind: 'simple' } });
    expect(reader.problems).toEqual([]);
  });

  it('limits with lower > upper', () => {
    expect(conformityProblems({ lower: 21, upper: 20 }, C)).toEqual([`${C}.lower: the lower limit 21 lies above the upper limit 20`]);
  });

  it('a guard band beyond the interval', () => {
    expect(conformityProblems({ lower: 19.5, upper: 20.5, rule: 'non-binary', guardBand: 0.5 }, C)).toEqual([
      `${C}.guardBand: a guard band of 0.5 on each side leaves no acceptance interval between 19.5 and 20.5 (it must be less than 0.5)`,
    ]);
  });

  it('no limit, an unknown rule, a negative guard factor, a guard band with simple acceptance', () => {
    expect(conformityProblems({ rule: 'simple' }, C)).toEqual([`${C}: missing: a lower or an upper specification limit (or both)`]);
    expect(conformityProblems({ upper: 1, rule: 'lenient' }, C)).toEqual([`${C}.rule: expected one of simple, guarded, non-binary, got "lenient"`]);
    expect(conformityProblems({ upper: 1, rule: 'guarded', guardFactor: -1 }, C)).toEqual([`${C}.guardFactor: expected a number at least 0, got -1`]);
    expect(conformityProblems({ upper: 1, guardFactor: 1 }, C)).toEqual([`${C}.guardFactor: simple acceptance has no guard band (use rule: guarded or non-binary)`]);
  });
});
