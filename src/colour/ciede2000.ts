/**
 * The CIEDE2000 colour difference, following the implementation notes of G. Sharma, W. Wu and
 * E. N. Dalal, Color Research & Application 30(1), 2005 (equations 2-22 there).
 */

const DEG = Math.PI / 180;
const POW25_7 = Math.pow(25, 7);

function hueAngle(b: number, ap: number): number {
  if (b === 0 && ap === 0) return 0; // Sharma et al. eq. 7: hue undefined, taken as 0
  const h = Math.atan2(b, ap) / DEG;
  return h < 0 ? h + 360 : h;
}

/**
 * CIEDE2000 difference between two CIELAB colours; kL, kC, kH are the parametric weights.
 * @example
 * ciede2000(50, 2.6772, -79.7751, 50, 0, -82.7485); // 2.0425 (Sharma et al. 2005, pair 1)
 */
export function ciede2000(L1: number, a1: number, b1: number, L2: number, a2: number, b2: number, kL = 1, kC = 1, kH = 1): number {
  // Step 1: C', h'
  const C1 = Math.sqrt(a1 * a1 + b1 * b1);
  const C2 = Math.sqrt(a2 * a2 + b2 * b2);
  const Cbar7 = Math.pow((C1 + C2) / 2, 7);
  const G = 0.5 * (1 - Math.sqrt(Cbar7 / (Cbar7 + POW25_7)));
  const a1p = (1 + G) * a1;
  const a2p = (1 + G) * a2;
  const C1p = Math.sqrt(a1p * a1p + b1 * b1);
  const C2p = Math.sqrt(a2p * a2p + b2 * b2);
  const h1p = hueAngle(b1, a1p);
  const h2p = hueAngle(b2, a2p);

  // Step 2: delta L', C', H'
  const dLp = L2 - L1;
  const dCp = C2p - C1p;
  const CpProd = C1p * C2p;
  let dhp = 0;
  if (CpProd !== 0) {
    dhp = h2p - h1p;
    if (dhp > 180) dhp -= 360;
    else if (dhp < -180) dhp += 360;
  }
  const dHp = 2 * Math.sqrt(CpProd) * Math.sin((dhp / 2) * DEG);

  // Step 3: the weighting functions
  const Lbarp = (L1 + L2) / 2;
  const Cbarp = (C1p + C2p) / 2;
  let hbarp = h1p + h2p;
  if (CpProd !== 0) {
    if (Math.abs(h1p - h2p) <= 180) hbarp /= 2;
    else hbarp = hbarp < 360 ? (hbarp + 360) / 2 : (hbarp - 360) / 2;
  }
  const T =
    1 -
    0.17 * Math.cos((hbarp - 30) * DEG) +
    0.24 * Math.cos(2 * hbarp * DEG) +
    0.32 * Math.cos((3 * hbarp + 6) * DEG) -
    0.2 * Math.cos((4 * hbarp - 63) * DEG);
  const dTheta = 30 * Math.exp(-Math.pow((hbarp - 275) / 25, 2));
  const Cbarp7 = Math.pow(Cbarp, 7);
  const RC = 2 * Math.sqrt(Cbarp7 / (Cbarp7 + POW25_7));
  const Lm50sq = (Lbarp - 50) * (Lbarp - 50);
  const SL = 1 + (0.015 * Lm50sq) / Math.sqrt(20 + Lm50sq);
  const SC = 1 + 0.045 * Cbarp;
  const SH = 1 + 0.015 * Cbarp * T;
  const RT = -Math.sin(2 * dTheta * DEG) * RC;

  const tL = dLp / (kL * SL);
  const tC = dCp / (kC * SC);
  const tH = dHp / (kH * SH);
  return Math.sqrt(tL * tL + tC * tC + tH * tH + RT * tC * tH);
}
