"""How far a datasheet fit is from the CEC module library's own parameters.

For a seeded random sample of crystalline modules of the CEC module library
(California Energy Commission, as shipped with pvlib), each record's
datasheet values are fitted by pvsource, with and without the power
temperature coefficient (``gamma_r``), and P_mp at four conditions is
compared with pvlib's ``calcparams_cec`` + ``singlediode`` on the library's
own six parameters. Prints a Markdown table of |error| median, 95th
percentile and worst, and how many fits used each method.

Run:  PYTHONPATH=$PWD python bench/bench_fit_cec.py [--count 1000] [--seed 11]
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd
from pvlib import pvsystem

from pvsource.errors import InputError
from pvsource.module import Datasheet, fit_datasheet, key_points, parameters_at

CONDITIONS = ((1000.0, 65.0), (1000.0, -10.0), (600.0, 45.0), (200.0, 25.0))


def crystalline_sample(count: int, seed: int) -> pd.DataFrame:
    """A seeded random sample of the library's Mono-c-Si and Multi-c-Si records."""
    cec = pvsystem.retrieve_sam("CECMod").T
    crystalline = cec[cec.Technology.isin(["Mono-c-Si", "Multi-c-Si"])]
    return crystalline.sample(count, random_state=seed)


def datasheet(r, with_power_coefficient: bool) -> Datasheet:
    """The datasheet a user would type for one library record."""
    return Datasheet(float(r.V_oc_ref), float(r.I_sc_ref), float(r.V_mp_ref), float(r.I_mp_ref),
                     100 * float(r.alpha_sc) / float(r.I_sc_ref), 100 * float(r.beta_oc) / float(r.V_oc_ref),
                     int(r.N_s), name=str(r.name),
                     pmax_temp_coeff_pct=float(r.gamma_r) if with_power_coefficient else None)


def library_p_mp(sample: pd.DataFrame, g_w_m2: float, t_c: float) -> np.ndarray:
    """P_mp of every record from its own CEC parameters (pvlib calcparams_cec + singlediode)."""
    col = {k: sample[k].astype(float).to_numpy() for k in
           ("alpha_sc", "a_ref", "I_L_ref", "I_o_ref", "R_sh_ref", "R_s", "Adjust")}
    params = pvsystem.calcparams_cec(g_w_m2, t_c, col["alpha_sc"], col["a_ref"], col["I_L_ref"], col["I_o_ref"],
                                     col["R_sh_ref"], col["R_s"], col["Adjust"])
    return np.asarray(pvsystem.singlediode(*params)["p_mp"], float)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=1000)
    parser.add_argument("--seed", type=int, default=11)
    args = parser.parse_args()
    sample = crystalline_sample(args.count, args.seed)
    rows, methods, skipped = [], {}, 0
    start = time.perf_counter()
    fits = {True: [], False: []}
    kept = []
    for _, r in sample.iterrows():
        try:
            pair = {flag: fit_datasheet(datasheet(r, flag)) for flag in (True, False)}
        except InputError:
            skipped += 1          # e.g. half-cut records that count every half cell in series
            continue
        kept.append(r.name)
        for flag, m in pair.items():
            fits[flag].append(m)
            methods[m.fit.method] = methods.get(m.fit.method, 0) + 1
    elapsed = time.perf_counter() - start
    sample = sample.loc[kept]
    for g, t in CONDITIONS:
        ref = library_p_mp(sample, g, t)
        for flag in (True, False):
            ours = np.array([float(key_points(parameters_at(m.parameters, g, t))["p_mp"]) for m in fits[flag]])
            err = np.abs(ours / ref - 1.0) * 100.0
            rows.append((f"{g:g} W/m2, {t:g} degC", "given" if flag else "not given",
                         np.median(err), np.percentile(err, 95), err.max()))
    print(f"{len(kept)} crystalline CEC records (seed {args.seed}; {skipped} rejected by the datasheet checks), "
          f"{2 * len(kept)} fits in {elapsed:.1f} s; methods: "
          + ", ".join(f"{k} {v}" for k, v in sorted(methods.items())))
    print()
    print("| condition | power coefficient | median | 95th percentile | worst |")
    print("|---|---|---:|---:|---:|")
    for cond, flag, med, p95, worst in rows:
        print(f"| {cond} | {flag} | {med:.2f} % | {p95:.2f} % | {worst:.2f} % |")


if __name__ == "__main__":
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        main()
