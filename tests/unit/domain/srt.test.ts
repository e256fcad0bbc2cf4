import { describe, expect, it } from 'vitest';
import { aerobicMassFraction, dynamicSrt, EFFLUENT_TSS_NOT_MEASURED, rollingSrt, srt, wasFlowForTargetSrt_m3h, type TimedSample } from '../../../shared/domain/srt.js';

const H = 3_600_000;

describe('steady-state SRT and WAS advisor', () => {
  // Worked example of the SRT definition (Metcalf & Eddy 5th ed. 2014, ch. 7 definition; numbers our own, by hand):
  // M = 36 000 + 6 000 kg; losses 15·8 + 1000·0.01 = 130 kg/h → total 42 000/130/24 = 13.4615 d, aeration 36 000/130/24 = 11.5385 d.
  it('total and aeration-only SRT by hand', () => {
    const s = srt({ aerationMass_kg: 36000, clarifierMass_kg: 6000, wasFlow_m3h: 15, wasTss_gL: 8, effluentFlow_m3h: 1000, effluentTss_gL: 0.01 });
    expect(s.total_d.value).toBeCloseTo(13.4615, 4);
    expect(s.aeration_d.value).toBeCloseTo(11.5385, 4);
  });

  it('WAS advisor by hand: target 10 d on 42 000 kg → 175 kg/h; (175 − 10)/8 = 20.625 m³/h', () => {
    expect(wasFlowForTargetSrt_m3h(42000, 10, 1000, 0.01, 8).value).toBeCloseTo(20.625, 10);
    const neg = wasFlowForTargetSrt_m3h(42000, 10, 1000, 0.5, 8);
    expect(neg.quality).toBe('unavailable');
    expect(neg.reasons[0]).toMatch(/effluent solids alone/);
    expect(wasFlowForTargetSrt_m3h(42000, 10, 1000, 0.01, 0).value).toBeNull();
  });

  it('unbounded SRT is unavailable, not Infinity', () => {
    const s = srt({ aerationMass_kg: 36000, clarifierMass_kg: 0, wasFlow_m3h: 0, wasTss_gL: 8, effluentFlow_m3h: 0, effluentTss_gL: 0 });
    expect(s.total_d).toMatchObject({ value: null, quality: 'unavailable' });
  });
});

function series(fn: (t_h: number) => number, hours: number, step_h = 0.25, start_ms = 0): TimedSample[] {
  const out: TimedSample[] = [];
  for (let t = 0; t <= hours + 1e-9; t += step_h) out.push({ ts_ms: start_ms + t * H, value: fn(t) });
  return out;
}

describe('rolling SRT (flow-weighted wasting over a window)', () => {
  it('constant inputs reproduce the steady-state SRT', () => {
    const r = rollingSrt({
      aerationMass_kg: series(() => 36000, 24),
      clarifierMass_kg: series(() => 6000, 24),
      outlets: [{ wasFlow_m3h: series(() => 15, 24), wasTss_gL: series(() => 8, 24), effluentFlow_m3h: series(() => 1000, 24), effluentTss_gL: series(() => 0.01, 24) }],
      end_ms: 24 * H,
    });
    expect(r.coverage).toBeCloseTo(1, 12);
    expect(r.total_d.quality).toBe('good');
    expect(r.total_d.value).toBeCloseTo(42000 / 130 / 24, 9);
    expect(r.aeration_d.value).toBeCloseTo(36000 / 130 / 24, 9);
  });

  it('flow-weights the wasting: WAS only 6 h of 24 at 60 m³/h equals 15 m³/h continuous', () => {
    // WAS on from 6 h to 12 h (step edges sampled 1 ms apart so the interpolation keeps them sharp)
    const was: TimedSample[] = [
      ...series(() => 0, 5),
      { ts_ms: 6 * H - 1, value: 0 },
      ...series(() => 60, 6, 1, 6 * H),
      { ts_ms: 12 * H + 1, value: 0 },
      ...series(() => 0, 11, 1, 13 * H),
    ];
    const r = rollingSrt({
      aerationMass_kg: series(() => 36000, 24),
      outlets: [{ wasFlow_m3h: was, wasTss_gL: series(() => 8, 24), effluentFlow_m3h: series(() => 1000, 24), effluentTss_gL: series(() => 0.01, 24) }],
      end_ms: 24 * H,
    });
    // mean loss = (60·8·6 h + tiny ramps)/24 + 10 = 130 kg/h (ramps of 1 ms add < 1e-6)
    expect(r.total_d.value).toBeCloseTo(36000 / 130 / 24, 4);
  });

  it('flow-weights X_W too: Q_W·X_W is integrated as a product, not as mean Q_W × mean X_W', () => {
    // Q_W 30 m³/h for the first 12 h then 0; X_W 4 g/L for the first 12 h then 12 g/L.
    // ∫Q_W·X_W dt = 30·4·12 = 1440 kg (means alone would give 15·8·24 = 2880 kg);
    // mean loss = 1440/24 + 1000·0.01 = 70 kg/h → SRT 36 000/70/24 = 21.4286 d.
    const step = (a: number, b: number): TimedSample[] => [...series(() => a, 12), { ts_ms: 12 * H + 1, value: b }, ...series(() => b, 11, 1, 13 * H)];
    const r = rollingSrt({
      aerationMass_kg: series(() => 36000, 24),
      outlets: [{ wasFlow_m3h: step(30, 0), wasTss_gL: step(4, 12), effluentFlow_m3h: series(() => 1000, 24), effluentTss_gL: series(() => 0.01, 24) }],
      end_ms: 24 * H,
    });
    expect(r.total_d.value).toBeCloseTo(36000 / 70 / 24, 4);
  });

  it('sums the outlets: two trains wasting 15 and 5 m³/h of 8 g/L sludge', () => {
    // loss = (15·8 + 600·0.01) + (5·8 + 400·0.01) = 126 + 44 = 170 kg/h; SRT 42 000/170/24 = 10.2941 d
    const r = rollingSrt({
      aerationMass_kg: series(() => 36000, 24),
      clarifierMass_kg: series(() => 6000, 24),
      outlets: [
        { wasFlow_m3h: series(() => 15, 24), wasTss_gL: series(() => 8, 24), effluentFlow_m3h: series(() => 600, 24), effluentTss_gL: series(() => 0.01, 24) },
        { wasFlow_m3h: series(() => 5, 24), wasTss_gL: series(() => 8, 24), effluentFlow_m3h: series(() => 400, 24), effluentTss_gL: series(() => 0.01, 24) },
      ],
      end_ms: 24 * H,
    });
    expect(r.total_d).toMatchObject({ quality: 'good' });
    expect(r.total_d.value).toBeCloseTo(42000 / 170 / 24, 9);
  });

  it('an outlet without effluent TSS counts X_e as 0 and says the SRT is overstated', () => {
    // loss = 15·8 = 120 kg/h → 42 000/120/24 = 14.5833 d (against 13.4615 d with X_e = 0.01 g/L)
    const r = rollingSrt({
      aerationMass_kg: series(() => 36000, 24),
      clarifierMass_kg: series(() => 6000, 24),
      outlets: [{ wasFlow_m3h: series(() => 15, 24), wasTss_gL: series(() => 8, 24), effluentFlow_m3h: series(() => 1000, 24) }],
      end_ms: 24 * H,
    });
    expect(r.total_d.value).toBeCloseTo(42000 / 120 / 24, 9);
    expect(r.total_d.quality).toBe('estimated');
    expect(r.total_d.reasons).toContain(EFFLUENT_TSS_NOT_MEASURED);
    expect(rollingSrt({ aerationMass_kg: series(() => 36000, 24), outlets: [], end_ms: 24 * H }).total_d.value).toBeNull();
  });

  it('gaps, bad samples and short coverage downgrade the quality', () => {
    const outlet = { wasFlow_m3h: series(() => 15, 24), wasTss_gL: series(() => 8, 24), effluentFlow_m3h: series(() => 1000, 24), effluentTss_gL: series(() => 0.01, 24) };
    const base = { aerationMass_kg: series(() => 36000, 24), end_ms: 24 * H };
    const half = rollingSrt({ ...base, outlets: [{ ...outlet, wasFlow_m3h: series(() => 15, 16) }] });
    expect(half.total_d.quality).toBe('estimated');
    expect(half.coverage).toBeCloseTo(16 / 24, 9);
    expect(half.total_d.value).toBeCloseTo(36000 / 130 / 24, 9);
    const sparse = rollingSrt({ ...base, outlets: [{ ...outlet, wasFlow_m3h: series(() => 15, 6) }] });
    expect(sparse.total_d).toMatchObject({ value: null, quality: 'unavailable' });
    const withBad = rollingSrt({ ...base, outlets: [{ ...outlet, wasTss_gL: [...series(() => 8, 24), { ts_ms: 5 * H + 1, value: null }] }] });
    expect(withBad.total_d.quality).toBe('estimated');
    expect(withBad.total_d.reasons.join(' ')).toMatch(/dropped/);
    const gap = rollingSrt({ ...base, outlets: [{ ...outlet, effluentTss_gL: [{ ts_ms: 0, value: 0.01 }, { ts_ms: 24 * H, value: 0.01 }] }] });
    expect(gap.total_d.value).toBeNull(); // one 24 h gap > 2 h maxGap: nothing covered
    const empty = rollingSrt({ ...base, aerationMass_kg: [], outlets: [outlet] });
    expect(empty.total_d.value).toBeNull();
  });
});

/**
 * Independent reference: classic RK4 on the age balance in its θ form,
 * dθ/dt = 1 − θ·(W(t) + dM/dt)/M(t) (expanded from d(M·θ)/dt = M − W·θ; the product integrates
 * the A = M·θ form by the exponential midpoint rule instead), with M and W linear between the
 * given points, fixed step h.
 */
function rk4Age(points: { t_h: number; m: number; w: number }[], theta0_h: number, h = 0.01): number[] {
  const at = (t: number) => {
    let i = 0;
    while (i + 2 < points.length && points[i + 1]!.t_h <= t) i++;
    const a = points[i]!;
    const b = points[i + 1]!;
    const f = (t - a.t_h) / (b.t_h - a.t_h);
    return { m: a.m + f * (b.m - a.m), w: a.w + f * (b.w - a.w), dm: (b.m - a.m) / (b.t_h - a.t_h) };
  };
  const rhs = (t: number, th: number) => {
    const x = at(t);
    return 1 - (th * (x.w + x.dm)) / x.m;
  };
  const out = [theta0_h];
  let th = theta0_h;
  for (let i = 1; i < points.length; i++) {
    const t0 = points[i - 1]!.t_h;
    const n = Math.round((points[i]!.t_h - t0) / h);
    const hh = (points[i]!.t_h - t0) / n;
    for (let j = 0; j < n; j++) {
      // The last stage is evaluated just inside the interval, so dM/dt is this interval's slope.
      const t = t0 + j * hh;
      const k1 = rhs(t, th);
      const k2 = rhs(t + hh / 2, th + (hh / 2) * k1);
      const k3 = rhs(t + hh / 2, th + (hh / 2) * k2);
      const k4 = rhs(Math.min(t + hh, points[i]!.t_h - 1e-9), th + hh * k3);
      th += (hh / 6) * (k1 + 2 * k2 + 2 * k3 + k4);
    }
    out.push(th);
  }
  return out;
}

describe('dynamic SRT on the age balance d(M·θ)/dt = M − W·θ (after Takács et al. 2008 [M])', () => {
  const series = (pts: { t_h: number; m: number; w: number }[]) => pts.map((p) => ({ ts_ms: p.t_h * H, mass_kg: p.m, removal_kgh: p.w }));

  it('constant M and W: stays at, and from elsewhere converges to, M/W (θ(t) = θ∞ + (θ0 − θ∞)·e^(−t·W/M))', () => {
    const s = Array.from({ length: 49 }, (_, i) => ({ ts_ms: i * H, mass_kg: 42000, removal_kgh: 130 }));
    const r = dynamicSrt(s);
    expect(r.quality).toBe('good');
    for (const p of r.value!) expect(p.srt_d).toBeCloseTo(42000 / 130 / 24, 9);
    const theta0_d = 20;
    const long = Array.from({ length: 241 }, (_, i) => ({ ts_ms: i * H, mass_kg: 42000, removal_kgh: 175 }));
    const l = dynamicSrt(long, theta0_d).value!;
    const inf_h = 42000 / 175;
    for (const t_h of [0, 24, 120, 240]) expect(l[t_h]!.srt_d).toBeCloseTo((inf_h + (theta0_d * 24 - inf_h) * Math.exp((-t_h * 175) / 42000)) / 24, 9);
    // 240 h = 1 time constant M/W = 240 h… run 30 of them: within 1e-9 of M/W
    const conv = dynamicSrt([{ ts_ms: 0, mass_kg: 42000, removal_kgh: 175 }, { ts_ms: 30 * 240 * H, mass_kg: 42000, removal_kgh: 175 }], 40).value!;
    expect(conv[1]!.srt_d).toBeCloseTo(inf_h / 24, 9);
    // with no wasting the age grows one day per day
    const aging = dynamicSrt([{ ts_ms: 0, mass_kg: 42000, removal_kgh: 0 }, { ts_ms: 48 * H, mass_kg: 42000, removal_kgh: 0 }], 10).value!;
    expect(aging[1]!.srt_d).toBeCloseTo(12, 12);
  });

  it('issue 16 example: 42 000 → 46 200 kg over 48 h at 130 kg/h removal gives 12.41 d (production basis), not 13.55 d (removal as production)', () => {
    const pts = [
      { t_h: 0, m: 42000, w: 130 },
      { t_h: 48, m: 46200, w: 130 },
    ];
    const r = dynamicSrt(series(pts)).value!;
    // Start: steady age M/W = 42 000/130 h. Reference: RK4 above → 12.406 d; the 12.41 d.
    expect(r[1]!.srt_d).toBeCloseTo(rk4Age(pts, 42000 / 130)[1]! / 24, 6);
    expect(r[1]!.srt_d).toBeCloseTo(12.41, 2);
    // The old feed (P = W = 130 kg/h while M grows) solved by the same RK4: 13.55 d, 9 % high.
    const removalAsProduction = rk4Age([{ t_h: 0, m: 42000, w: 130 - 87.5 }, { t_h: 48, m: 46200, w: 130 - 87.5 }], 42000 / 130)[1]! / 24;
    expect(removalAsProduction).toBeCloseTo(13.55, 2);
  });

  it('a rising inventory with a diurnal wasting pattern follows an independent RK4 to 1e-6 relative', () => {
    // Ramp 40 000 → 48 000 kg over 72 h, hourly points; W = 140·(1 + 0.5·sin(2πt/24)) kg/h (wasting by day).
    const pts = Array.from({ length: 73 }, (_, t) => ({ t_h: t, m: 40000 + (8000 * t) / 72, w: 140 * (1 + 0.5 * Math.sin((2 * Math.PI * t) / 24)) }));
    const r = dynamicSrt(series(pts), 12).value!;
    const ref = rk4Age(pts, 12 * 24);
    for (let i = 0; i < pts.length; i++) expect(Math.abs(r[i]!.srt_d * 24 - ref[i]!) / ref[i]!).toBeLessThan(1e-6);
  });

  it('is unavailable without a starting age it can derive; drops invalid samples with a reason', () => {
    expect(dynamicSrt([]).quality).toBe('unavailable');
    expect(dynamicSrt([{ ts_ms: 0, mass_kg: 1000, removal_kgh: 0 }]).value).toBeNull();
    const d = dynamicSrt([{ ts_ms: 0, mass_kg: 1000, removal_kgh: 10 }, { ts_ms: H, mass_kg: 0, removal_kgh: 10 }]);
    expect(d).toMatchObject({ quality: 'estimated', reasons: ['1 invalid sample(s) ignored'] });
  });
});

describe('aerobic SRT on a mass basis: SRT_aerobic = SRT_basins × Σ(Vᵢ·Xᵢ·fᵢ)/Σ(Vᵢ·Xᵢ) (aerated mass over removal; Metcalf & Eddy 5th ed. ch. 7 [M])', () => {
  it('an anoxic zone of 2000 m³ before an aerated 6000 m³, both at 3 g/L: 6000·3/(8000·3) = 0.75', () => {
    expect(aerobicMassFraction([{ volume_m3: 2000, mlss_gL: 3, aeratedFraction: 0 }, { volume_m3: 6000, mlss_gL: 3, aeratedFraction: 1 }]).value).toBeCloseTo(0.75, 12);
    // mass basis, not volume: a thinner anoxic zone weighs less — (6000·3)/(2000·2 + 6000·3) = 18/22
    expect(aerobicMassFraction([{ volume_m3: 2000, mlss_gL: 2, aeratedFraction: 0 }, { volume_m3: 6000, mlss_gL: 3, aeratedFraction: 1 }]).value).toBeCloseTo(18 / 22, 12);
    // a swing zone aerated half the volume counts half
    expect(aerobicMassFraction([{ volume_m3: 4000, mlss_gL: 3, aeratedFraction: 0.5 }]).value).toBeCloseTo(0.5, 12);
  });
  it('refuses fractions outside 0–1 and an empty inventory', () => {
    expect(aerobicMassFraction([{ volume_m3: 1, mlss_gL: 3, aeratedFraction: 1.2 }]).value).toBeNull();
    expect(aerobicMassFraction([{ volume_m3: 1, mlss_gL: 0, aeratedFraction: 1 }]).value).toBeNull();
  });
});
