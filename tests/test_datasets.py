"""Tests for complexity.datasets: the synthetic demo data is deterministic and as documented."""

import numpy as np

import complexity as cx
from complexity.datasets import pressure_sensor_drift


def test_demo_data_is_deterministic_and_shaped():
    X1, y1 = cx.datasets.pressure_sensor()
    X2, y2 = cx.datasets.pressure_sensor()
    assert X1.equals(X2) and y1.equals(y2)
    assert X1.shape == (51, 1) and list(X1.columns) == ["temperature_c"]
    Xa, ya = cx.datasets.pressure_sensor(as_frame=False)
    np.testing.assert_array_equal(Xa[:, 0], X1["temperature_c"].to_numpy())
    np.testing.assert_array_equal(ya, y1.to_numpy())
    # 17 set points, three readings each
    values, counts = np.unique(Xa[:, 0], return_counts=True)
    assert values.size == 17 and np.all(counts == 3)


def test_demo_noise_is_as_documented():
    # pure error from the replicates (Draper & Smith lack-of-fit) estimates the generating
    # noise variance 0.04^2; its relative SD is sqrt(2/df) with df = 34.
    X, y = cx.datasets.pressure_sensor(as_frame=False)
    resid = y - pressure_sensor_drift(X[:, 0])
    assert abs(np.std(resid) - 0.04) < 0.04 * 4 * np.sqrt(1 / (2 * 51))
    est = cx.estimate_noise(X, y)
    assert est.method == "replicates"
    assert abs(est.value / 0.04**2 - 1) < 4 * np.sqrt(2 / 34)
