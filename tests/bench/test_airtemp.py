"""Air temperature read from a sensor file or a command (``--temp-source``)."""

from __future__ import annotations

import sys

import pytest

from bench.airtemp import AirTemperatureSource, parse_temp_c
from bench.errors import SettingsError

# Linux kernel, Documentation/w1/slaves/w1_therm.rst: the w1_slave file of a DS18B20 holds two
# lines of scratchpad bytes, the first ending in "crc=XX YES" (or NO), the second in "t=" and the
# temperature in millidegrees Celsius; the newer "temperature" attribute holds the millidegrees
# alone. (Format from memory of that document and of sensors seen in use.)
W1_SLAVE_OK = "72 01 4b 46 7f ff 0e 10 57 : crc=57 YES\n72 01 4b 46 7f ff 0e 10 57 t=23125\n"
W1_SLAVE_BAD_CRC = "72 01 4b 46 7f ff 0e 10 57 : crc=57 NO\n72 01 4b 46 7f ff 0e 10 57 t=23125\n"


def test_one_wire_w1_slave_file(tmp_path):
    sensor = tmp_path / "w1_slave"
    sensor.write_text(W1_SLAVE_OK)
    assert AirTemperatureSource(str(sensor)).read_temp_c() == pytest.approx(23.125)


def test_one_wire_bad_crc_is_refused_not_misread(tmp_path):
    sensor = tmp_path / "w1_slave"
    sensor.write_text(W1_SLAVE_BAD_CRC)
    with pytest.raises(SettingsError, match="bad CRC"):
        AirTemperatureSource(str(sensor)).read_temp_c()


def test_one_wire_temperature_attribute_in_millidegrees():
    assert parse_temp_c("21500\n", "temperature") == pytest.approx(21.5)
    assert parse_temp_c("-2500\n", "temperature") == pytest.approx(-2.5)


@pytest.mark.parametrize(("text", "temp_c"), [("22.5", 22.5), ("temp: 19,5 C", 19.5), ("-3\n", -3.0)])
def test_plain_numbers_are_degrees(text, temp_c):
    assert parse_temp_c(text, "file") == pytest.approx(temp_c)


def test_a_command_is_run_and_its_number_read():
    source = AirTemperatureSource(f"cmd:{sys.executable} -c \"print('24.25')\"")
    assert source.read_temp_c() == pytest.approx(24.25)


@pytest.mark.parametrize("text", ["warm", "", "99.0"])
def test_unusable_readings_give_one_line(text):
    with pytest.raises(SettingsError) as err:
        parse_temp_c(text, "file x")
    assert "\n" not in str(err.value) and "file x" in str(err.value)


def test_a_missing_file_gives_one_line(tmp_path):
    with pytest.raises(SettingsError, match="cannot read temperature file"):
        AirTemperatureSource(str(tmp_path / "nope")).read_temp_c()
