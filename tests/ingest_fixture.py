"""Small invented reference tables and check files for the ingest tests."""

from __future__ import annotations

from pathlib import Path

SITES = """site_id,region,time_zone,latitude,longitude,elevation_m
S-1,North,America/New_York,40.0,-75.0,10
S-2,West,Europe/Berlin,52.5,13.4,34
"""
INSTRUMENTS = """instrument_id,technology,model,site_id,region,in_service_on,latitude,longitude
U1,fuel_cell,Model A,S-1,North,2024-01-01,40.0,-75.0
U2,infrared,Model B,S-2,West,2024-01-01,52.5,13.4
"""
LOTS = """lot_id,standard_kind,target,units,expanded_uncertainty,certified_on,expires_on,supplier
L1,wet_bath,0.080,g/210L,0.0016,2024-01-01,2027-01-01,Invented Lab
L2,dry_gas,0.381,mg/L,0.0076,2024-01-01,2027-01-01,Invented Gas
"""
HEADER = "instrument_id,measured_at,lot_id,check_type,target,measured,units,simulator_temp_c,pressure_kpa,site_id,operator_id,outcome\n"


def write_reference(dir_: Path) -> list[Path]:
    out = []
    for name, text in (("sites", SITES), ("instruments", INSTRUMENTS), ("lots", LOTS)):
        p = dir_ / f"{name}.csv"
        p.write_text(text, encoding="utf-8")
        out.append(p)
    return out


def good_row(i: int, instrument: str = "U1") -> str:
    return (f"{instrument},2026-05-01T10:{i // 60 % 60:02d}:{i % 60:02d}+00:00,L1,control,0.080,0.0{79 + i % 3},"
            f"g/210L,34.00,,S-1,OP-{i % 7},pass")
