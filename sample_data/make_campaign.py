"""Generate the demo campaign in this folder: records and the test sheet.

Everything here is invented for the demonstration: the laboratory (Ashgrove
Materials Test Laboratory), the supplier (Calderwick Forge & Plate), the
heats, the materials data and the records.  The records are synthetic curves
with known answers (reduce.synthetic), written in the styles different rigs
use: CSV with a preamble, semicolon-separated with decimal commas, tab-
separated in US units, and an Excel workbook.  They are not measurements.

Run ``python sample_data/make_campaign.py`` to write them again; the output
is the same every time (fixed random seeds).
"""

from __future__ import annotations

import csv
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

import specimens  # noqa: E402
from specimens.compliance import compliance_from_crack_length  # noqa: E402
from reduce.synthetic import make_record, secant_point  # noqa: E402
from reduce.units import INCH_MM, LBF_N  # noqa: E402

SUPPLIER = "Calderwick Forge & Plate"

# heat -> material and test data (all invented)
HEATS = {
    "H-7A21": dict(material="7075-T7351 aluminium plate, 50 mm", geometry="C(T)", B=25.0, W=50.0,
                   yield_MPa=420.0, tensile_MPa=490.0, E_GPa=71.7, temperature_C=21.0, orientation="L-T",
                   rig="csv"),
    "H-4S08": dict(material="4340 steel bar forging, quenched and tempered", geometry="SE(B)", B=20.0,
                   W=40.0, S=160.0, yield_MPa=1380.0, tensile_MPa=1520.0, E_GPa=205.0, temperature_C=21.0,
                   orientation="C-R", rig="semicolon"),
    "H-PV33": dict(material="pressure-vessel steel plate, normalised", geometry="C(T)", B=25.0, W=50.0,
                   yield_MPa=470.0, tensile_MPa=610.0, E_GPa=205.0, temperature_C=-20.0, orientation="T-L",
                   rig="tsv_us"),
}

# specimen -> (heat, curve kind, target K_Q MPa·m^½, readings a1..a3 as a/W, surface a/W or None,
#              precrack K_max as a fraction of K_Q, shape parameter m, what it demonstrates)
SPECIMENS = [
    ("AL-01", "H-7A21", "I", 29.5, (0.500, 0.506, 0.502), (0.49, 0.495), 0.55, 9.0, "valid, Type I"),
    ("AL-02", "H-7A21", "II", 28.1, (0.498, 0.503, 0.500), (0.485, 0.49), 0.55, 9.0, "valid, pop-in (Type II)"),
    ("AL-03", "H-7A21", "I", 30.2, (0.505, 0.511, 0.507), (0.495, 0.50), 0.60, 9.0, "valid, Type I"),
    ("AL-04", "H-7A21", "I", 29.0, (0.497, 0.502, 0.499), (0.49, 0.49), 0.92, 9.0, "precrack K_max too high"),
    ("AL-05", "H-7A21", "I", 29.8, (0.501, 0.507, 0.503), (0.40, 0.46), 0.55, 9.0, "surface crack traces out"),
    ("ST-01", "H-4S08", "III", 58.0, (0.502, 0.507, 0.503), None, 0.50, 8.0, "valid, fracture (Type III)"),
    ("ST-02", "H-4S08", "I", 61.0, (0.498, 0.504, 0.500), None, 0.50, 9.0, "valid, Type I, Excel record"),
    ("ST-03", "H-4S08", "III", 57.5, (0.576, 0.582, 0.579), None, 0.50, 8.0, "a/W out of range"),
    ("ST-04", "H-4S08", "III", 59.0, (0.450, 0.520, 0.505), None, 0.50, 8.0, "uneven crack front"),
    ("PV-01", "H-PV33", "I", 112.0, (0.503, 0.509, 0.505), None, 0.45, 3.5, "too tough: size, P_max/P_Q"),
    ("PV-02", "H-PV33", "I", 118.0, (0.499, 0.505, 0.502), None, 0.45, 3.5, "too tough: size, P_max/P_Q"),
    ("PV-03", "H-PV33", "I", 108.0, (0.501, 0.506, 0.503), None, 0.45, 3.5, "too tough: size, P_max/P_Q"),
]

NOISE_FRACTION = 0.0015  # load scatter as a fraction of P_Q
# rig -> (start as a multiple of v_5, strength): the tough plate tears in a ductile way, so past
# start·v_5 its load is reduced more and more; the record passes a maximum near 2.5 v_5 and has
# fallen about 4 % by its end (an invented shape, so the demo shows a load maximum reached)
TEARING = {"tsv_us": (2.0, 0.06)}
K_RATE = 1.2  # MPa·m^½/s, inside the E399 range


def _record(spec_id, heat, kind, K_target, a_readings, m, seed):
    h = HEATS[heat]
    geo = specimens.geometry(h["geometry"])
    W = h["W"]
    a = float(np.mean(a_readings)) * W
    dims = {"S": h.get("S")} if h.get("S") else {}
    K_per_kN = geo.K_per_load(h["B"], W, a, None, dims)
    P_Q = K_target / K_per_kN
    C = compliance_from_crack_length(geo, a, B=h["B"], W=W, E_MPa=h["E_GPa"] * 1000.0, S=h.get("S"))
    k = 1.0 / C
    # plateau load giving the wanted P_Q for each curve type (reduce.synthetic)
    frac = {"I": 1.0, "II": 0.85, "III": 0.80}[kind]
    _, P5_unit = secant_point(k, 1.0, m)
    P_y = P_Q / (frac * P5_unit)
    overshoot = 3.2 if h["rig"] in TEARING else 1.22
    rec = make_record(kind, k=k, P_y=P_y, m=m, n=2500, noise_kN=NOISE_FRACTION * P_Q,
                      offset_mm=0.012 * (1 + seed % 3), toe_mm=0.004 if seed % 2 else 0.0,
                      rate_kN_s=K_RATE / K_per_kN, overshoot=overshoot, seed=seed)
    if h["rig"] in TEARING:
        start, strength = TEARING[h["rig"]]
        v5, _ = secant_point(k, P_y, m)
        v = rec.disp_mm - rec.disp_mm[0]
        rec.load_kN = rec.load_kN * (1.0 - strength * np.clip(v / v5 - start, 0.0, None) ** 2)
        rec.P_max = float(rec.load_kN.max())
    return rec, a


def _write_csv(path, rec, spec_id):
    with open(path, "w", newline="", encoding="utf-8") as fh:
        fh.write("Ashgrove Materials Test Laboratory - frame 2 (100 kN)\n")
        fh.write(f"Specimen: {spec_id}\n")
        fh.write("Channels: time, load cell, clip gauge at load line\n\n")
        w = csv.writer(fh)
        w.writerow(["Time (s)", "Load (kN)", "COD (mm)"])
        for t, P, v in zip(rec.time_s, rec.load_kN, rec.disp_mm):
            w.writerow([f"{t:.3f}", f"{P:.5f}", f"{v:.6f}"])


def _write_semicolon(path, rec, spec_id):
    lines = ["Ashgrove MTL;frame 5 (250 kN);bend fixture S = 160 mm", f"Specimen;{spec_id}",
             "Time [s];Force [kN];CMOD [mm]"]
    for t, P, v in zip(rec.time_s, rec.load_kN, rec.disp_mm):
        lines.append(f"{t:.3f};{P:.5f};{v:.6f}".replace(".", ","))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _write_xlsx(path, rec, spec_id):
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    ws.append(["Ashgrove MTL frame 5 export"])
    ws.append(["Specimen", spec_id])
    ws.append([])
    ws.append(["Time (s)", "Load (kN)", "CMOD (mm)"])
    for t, P, v in zip(rec.time_s, rec.load_kN, rec.disp_mm):
        ws.append([round(float(t), 3), round(float(P), 5), round(float(v), 6)])
    wb.save(path)


def _write_tsv_us(path, rec, spec_id):
    lines = [f"# Calderwick Forge & Plate, mechanical test cell, specimen {spec_id}",
             "Time (s)\tLoad (lbf)\tCOD (in)"]
    for t, P, v in zip(rec.time_s, rec.load_kN * 1000.0 / LBF_N, rec.disp_mm / INCH_MM):
        lines.append(f"{t:.3f}\t{P:.2f}\t{v:.7f}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


WRITERS = {"csv": (_write_csv, ".csv"), "semicolon": (_write_semicolon, ".txt"),
           "tsv_us": (_write_tsv_us, ".tsv")}


def main() -> None:
    rec_dir = HERE / "records"
    rec_dir.mkdir(exist_ok=True)
    rows = []
    for seed, (sid, heat, kind, K, aw, surf, kmax_frac, m, _why) in enumerate(SPECIMENS):
        h = HEATS[heat]
        rec, a = _record(sid, heat, kind, K, aw, m, seed)
        writer, ext = WRITERS[h["rig"]]
        if sid == "ST-02":
            writer, ext = _write_xlsx, ".xlsx"
        name = f"{sid}{ext}"
        writer(rec_dir / name, rec, sid)
        W = h["W"]
        row = {
            "specimen": sid, "heat": heat, "material": h["material"], "supplier": SUPPLIER,
            "geometry": h["geometry"], "record": f"records/{name}",
            "B_mm": h["B"], "W_mm": W, "S_mm": h.get("S", ""),
            "a1_mm": round(aw[0] * W, 2), "a2_mm": round(aw[1] * W, 2), "a3_mm": round(aw[2] * W, 2),
            "as1_mm": round(surf[0] * W, 2) if surf else "", "as2_mm": round(surf[1] * W, 2) if surf else "",
            "yield_MPa": h["yield_MPa"], "tensile_MPa": h["tensile_MPa"], "E_GPa": h["E_GPa"],
            "temperature_C": h["temperature_C"], "orientation": h["orientation"],
            "precrack_Kmax_MPa_sqrt_m": round(kmax_frac * K, 1),
        }
        rows.append(row)
    with open(HERE / "campaign.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    print(f"wrote {len(rows)} records and {HERE / 'campaign.csv'}")


if __name__ == "__main__":
    main()
