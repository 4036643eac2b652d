"""Bounded fuzzing of the readers: whatever the bytes, an InputError or a valid result, never a crash."""

import string

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pvsource.config import load_system
from pvsource.errors import InputError
from pvsource.weather import read_weather_csv

from conftest import DATA

FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
GOOD_SYSTEM = (DATA / "example-system.toml").read_text().replace(
    'file = "modules/ashgrove-ag300.toml"', (DATA / "modules" / "ashgrove-ag300.toml").read_text().split("[module]")[1])
GOOD_CSV = "timestamp,ghi,temp_air\n" + "".join(
    f"2025-06-01T{h:02d}:00:00+01:00,{max(0, 800 - abs(h - 12) * 130)},{15 + h % 5}\n" for h in range(24))


def _mutate(text: str, data) -> str:
    """Replace, insert or delete a few characters at random places."""
    chars = list(text)
    for _ in range(data.draw(st.integers(1, 6))):
        k = data.draw(st.integers(0, len(chars)))
        op = data.draw(st.sampled_from(["replace", "insert", "delete"]))
        ch = data.draw(st.sampled_from(string.printable + "\x00\ufeff;,\"'[]=#"))
        if op == "insert" or k == len(chars):
            chars.insert(k, ch)
        elif op == "replace":
            chars[k] = ch
        else:
            del chars[k]
    return "".join(chars)


@FUZZ
@given(data=st.data())
def test_mutated_system_files_fail_cleanly(tmp_path, data):
    path = tmp_path / "system.toml"
    path.write_text(_mutate(GOOD_SYSTEM, data), encoding="utf-8", errors="surrogatepass")
    try:
        load_system(path)
    except InputError as exc:
        assert "\n" not in str(exc) and str(path) in str(exc)


@FUZZ
@given(raw=st.binary(max_size=400))
def test_random_bytes_as_a_system_file_fail_cleanly(tmp_path, raw):
    path = tmp_path / "system.toml"
    path.write_bytes(raw)
    try:
        load_system(path)
    except InputError as exc:
        assert "\n" not in str(exc)


@FUZZ
@given(data=st.data())
def test_mutated_weather_files_fail_cleanly(tmp_path, data):
    path = tmp_path / "weather.csv"
    path.write_text(_mutate(GOOD_CSV, data), encoding="utf-8", errors="surrogatepass")
    try:
        frame = read_weather_csv(path)
    except InputError as exc:
        assert "\n" not in str(exc) and str(exc).startswith(str(path))
    else:
        assert not frame.isna().any().any()


@FUZZ
@given(raw=st.binary(max_size=400))
def test_random_bytes_as_a_weather_file_fail_cleanly(tmp_path, raw):
    path = tmp_path / "weather.csv"
    path.write_bytes(raw)
    try:
        read_weather_csv(path, tz="UTC")
    except InputError as exc:
        assert "\n" not in str(exc)
