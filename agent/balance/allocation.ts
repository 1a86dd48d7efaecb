/**
 * Sharing the ISO 21940-11 permissible residual unbalance U_per of a rigid rotor between its
 * correction planes, from the rotor's geometry. Pure.
 *
 * ISO 21940-11 (formerly ISO 1940-1), FROM MEMORY (check the current edition before relying on it):
 *  1. U_per is allocated to the two BEARING planes A and B in inverse proportion to the distance of
 *     the centre of mass from each:  U_per,A = U_per * L_B / L,  U_per,B = U_per * L_A / L
 *     (L bearing span, L_A and L_B distances of the centre of mass from bearings A and B), with each
 *     share kept between 0.3 and 0.7 of U_per.
 *  2. For a rotor whose correction planes lie between the bearings and not close together (here:
 *     at least a third of the span apart), the bearing-plane values serve as the correction-plane
 *     tolerances: plane I (the one nearer bearing A) gets U_per,A, plane II gets U_per,B.
 * Where the standard has its own rules that are not reproduced here (overhung rotors, correction
 * planes outside the bearings or close together), this module uses a conservative transfer of its
 * own (own derivation, statics): both planes get the same tolerance u, the largest for which the
 * worst case (residuals in both planes in phase) loads neither bearing beyond its share:
 *     u = min( U_per,A / (|a_I| + |a_II|),  U_per,B / (|b_I| + |b_II|) ),
 * with a_p = (z_B - z_p) / L and b_p = (z_p - z_A) / L the lever-rule shares of a force in plane p.
 * For an overhung rotor even step 1 is not the standard's rule, so the equal split is kept,
 * flagged. Without geometry the equal split U_per / planes is the stated fallback.
 */
import type { Issue } from './job.js';

export interface RotorGeometry {
  /** centre_hung: impeller between the bearings; overhung: impeller outboard of both. */
  readonly rotor: 'centre_hung' | 'overhung';
  /** Axial positions along the shaft from one datum, mm. */
  readonly bearing_a_mm: number;
  readonly bearing_b_mm: number;
  readonly centre_of_mass_mm: number;
  /** Axial position of each correction plane, mm, same datum. */
  readonly planes_mm: Readonly<Record<string, number>>;
}

export interface Allocation {
  readonly method:
    | 'iso21940_11_bearing_planes'
    | 'iso21940_11_with_conservative_transfer'
    | 'single_plane'
    | 'equal_split_fallback';
  /** The rule in words, with its label (from memory / own derivation / fallback). */
  readonly basis: string;
  readonly permissible_g_mm: number;
  /** U_per,A and U_per,B, g mm (when the geometry gave them). */
  readonly bearing_planes_g_mm: { readonly A: number; readonly B: number } | null;
  readonly by_plane_g_mm: Readonly<Record<string, number>>;
  readonly warnings: readonly Issue[];
}

const SHARE_MIN = 0.3;
const SHARE_MAX = 0.7;
/**
 * Correction planes at least this share of the bearing span apart count as "not close together"
 * (this project's reading of the standard).
 */
const PLANE_SPACING_MIN = 1 / 3;

function equal(
  uPer: number,
  planes: readonly string[],
  basis: string,
  warnings: Issue[],
): Allocation {
  return {
    method: 'equal_split_fallback',
    basis,
    permissible_g_mm: uPer,
    bearing_planes_g_mm: null,
    by_plane_g_mm: Object.fromEntries(planes.map((p) => [p, uPer / planes.length])),
    warnings,
  };
}

export function allocatePermissible(
  uPer: number,
  planes: readonly string[],
  geometry?: RotorGeometry,
): Allocation {
  if (planes.length === 1) {
    return {
      method: 'single_plane',
      basis: 'one correction plane: it takes the whole U_per (ISO 21940-11, from memory)',
      permissible_g_mm: uPer,
      bearing_planes_g_mm: null,
      by_plane_g_mm: { [planes[0]!]: uPer },
      warnings: [],
    };
  }
  if (!geometry)
    return equal(
      uPer,
      planes,
      `no rotor geometry given: U_per shared equally between the ` +
        `${planes.length} planes (fallback; fits a symmetric rotor only)`,
      [],
    );
  if (planes.length !== 2)
    return equal(
      uPer,
      planes,
      `${planes.length} correction planes: the two-plane ` +
        `allocation does not apply, U_per shared equally (fallback)`,
      [],
    );
  const warnings: Issue[] = [];
  const zA = geometry.bearing_a_mm;
  const zB = geometry.bearing_b_mm;
  const L = Math.abs(zB - zA);
  const lo = Math.min(zA, zB);
  const hi = Math.max(zA, zB);
  const com = geometry.centre_of_mass_mm;
  const fallbackWords = 'U_per shared equally between the planes instead (fallback)';
  if (!(L > 0)) {
    warnings.push({
      code: 'bearings_coincide',
      message: `bearing A and bearing B are both at ${zA} mm: there is no span to allocate over`,
      hint: 'give the axial positions of the two bearings from one datum along the shaft',
    });
    return equal(uPer, planes, `geometry unusable: ${fallbackWords}`, warnings);
  }
  if (geometry.rotor === 'centre_hung' && (com < lo || com > hi)) {
    warnings.push({
      code: 'com_outside_bearings',
      message:
        `the centre of mass at ${com} mm lies outside the bearings ` +
        `(A at ${zA} mm, B at ${zB} mm) of a centre-hung rotor`,
      hint:
        'check the positions are measured from one datum along the shaft; if ' +
        'the impeller is outboard of both bearings, say the rotor is overhung ' +
        '(job: "rotor": "overhung"; check-grade: --rotor overhung). Until ' +
        'then the allocation is not trusted and the equal split is shown',
    });
    return equal(uPer, planes, `geometry inconsistent: ${fallbackWords}`, warnings);
  }
  if (geometry.rotor === 'overhung') {
    warnings.push({
      code: 'overhung_rules',
      message:
        'ISO 21940-11 allocates the tolerance of an overhung ' +
        'rotor by rules of its own, not reproduced here',
      hint:
        'take the plane tolerances from the standard (or the ' +
        'fan maker); the equal split shown is only a placeholder',
    });
    return equal(uPer, planes, `overhung rotor: ${fallbackWords}`, warnings);
  }
  // Step 1: bearing planes.
  const sA = Math.abs(zB - com) / L; // share of bearing A grows as the centre of mass nears it
  const shareA = Math.min(SHARE_MAX, Math.max(SHARE_MIN, sA));
  const shareB = 1 - shareA;
  if (shareA !== sA) {
    warnings.push({
      code: 'share_bounded',
      message:
        `the centre of mass gives bearing A ${(sA * 100).toFixed(0)} % of U_per; the ` +
        `standard keeps each share between ${SHARE_MIN * 100} and ` +
        `${SHARE_MAX * 100} % (from memory), so ${(shareA * 100).toFixed(0)} % is used`,
      hint: 'nothing to do; stated so the figures can be checked',
    });
  }
  const UA = shareA * uPer;
  const UB = shareB * uPer;
  // Planes: I is the one nearer bearing A.
  const [p1, p2] = planes as [string, string];
  const z1 = geometry.planes_mm[p1]!;
  const z2 = geometry.planes_mm[p2]!;
  const nearA = Math.abs(z1 - zA) <= Math.abs(z2 - zA) ? p1 : p2;
  const nearB = nearA === p1 ? p2 : p1;
  const inside = [z1, z2].every((z) => z >= lo && z <= hi);
  const spaced = Math.abs(z1 - z2) >= PLANE_SPACING_MIN * L;
  if (inside && spaced) {
    return {
      method: 'iso21940_11_bearing_planes',
      basis:
        `ISO 21940-11, from memory: U_per,A = U_per x L_B / L, U_per,B = U_per ` +
        `x L_A / L (each 0.3-0.7 of U_per), taken as the tolerances of the ` +
        `correction planes nearer each bearing (${nearA} and ${nearB}), which ` +
        `lie between the bearings at least L/3 apart`,
      permissible_g_mm: uPer,
      bearing_planes_g_mm: { A: UA, B: UB },
      by_plane_g_mm: { [nearA]: UA, [nearB]: UB },
      warnings,
    };
  }
  const a = (z: number) => Math.abs((zB - z) / (zB - zA));
  const b = (z: number) => Math.abs((z - zA) / (zB - zA));
  const u = Math.min(UA / (a(z1) + a(z2)), UB / (b(z1) + b(z2)));
  warnings.push({
    code: 'conservative_transfer',
    message:
      `the correction planes ` +
      `${inside ? 'are closer together than a third of the bearing span' : 'are not both between the bearings'}: ` +
      `the standard's own transfer for this case is not reproduced ` +
      `here, so a conservative one is used (own derivation)`,
    hint:
      'the per-plane tolerances shown are on the safe side; ' +
      'check against ISO 21940-11 for the exact figures',
  });
  return {
    method: 'iso21940_11_with_conservative_transfer',
    basis:
      `ISO 21940-11 bearing-plane allocation (from memory), then a ` +
      `conservative statics transfer to the correction planes (own derivation: ` +
      `both planes' residuals assumed in phase, neither bearing over its share)`,
    permissible_g_mm: uPer,
    bearing_planes_g_mm: { A: UA, B: UB },
    by_plane_g_mm: { [p1]: u, [p2]: u },
    warnings,
  };
}
