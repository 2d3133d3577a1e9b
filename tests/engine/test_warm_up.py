"""Start-up compiles every kernel a request can reach (issue 2: no request
pays for compilation)."""

import json
import subprocess
import sys

# Run in a fresh interpreter: in this one, earlier tests have compiled
# signatures already, which would hide a kernel the warm-up misses.
SCRIPT = r'''
import json
import numpy as np
from numba.core.registry import CPUDispatcher
from service.engine import _batch_kernels, _counting_kernels, _damage_kernels
from service.engine import _multiaxial_kernels, damage, multiaxial, rainflow
from service.engine import _mean_stress_kernels, _screening_kernels, screening, strain_life
from service.engine import _hermite, strain_life_local, strain_life_material
from service.engine.damage import AssessmentOptions, assess_history, assess_many
from service.engine.sn_catalogue import catalogue_curve

MODULES = (_batch_kernels, _counting_kernels, _damage_kernels, _multiaxial_kernels,
           _mean_stress_kernels, _screening_kernels, strain_life_local, strain_life_material,
           _hermite)

def signatures():
    return {f"{m.__name__}.{name}": len(obj.signatures)
            for m in MODULES for name, obj in vars(m).items()
            if isinstance(obj, CPUDispatcher)}

rainflow.warm_up()
damage.warm_up()
multiaxial.warm_up()
screening.warm_up()
strain_life.warm_up()
before = signatures()
rng = np.random.default_rng(1)
curve = catalogue_curve("EN1993-1-9:71")
opts = AssessmentOptions(mean_stress_method="goodman", ultimate_strength=700.0)
x = rng.standard_normal(400_000) * 50
assess_history(x, curve, opts)
_, state = rainflow.count_block(x[:300_000])
rainflow.count_block(x[300_000:], state, final=True)
rainflow.turning_points(x)
assess_many(rng.standard_normal((2000, 40)) * 50, curve, opts)
multiaxial.assess_multiaxial(rng.standard_normal((300_000, 3)) * 50, curve, opts)
spiky = np.cumsum(rng.standard_normal(200_000))
spiky[1000] += 500.0
spiky[5000:5400] = spiky[5000]
spiky[90_000:91_000] = spiky[10_000:11_000]
screening.screen(spiky, 1000.0)
steel = strain_life.StrainLifeMaterial(200_000.0, 900.0, 0.12, 900.0, -0.09, 0.5, -0.55)
for rule in ("neuber", "glinka"):
    strain_life.assess_strain_life(x[:50_000] * 4, steel, kt=2.5, rule=rule,
                                   mean_stress_method="smith_watson_topper")
strain_life.assess_strain_life(x[:50_000] * 1e-5, steel, input_kind="local_strain")
after = signatures()
print(json.dumps({k: [before.get(k), v] for k, v in after.items() if before.get(k) != v}))
'''


def test_requests_after_warm_up_compile_nothing():
    # The service's warm-up, then the paths of real requests: a long history
    # (pipeline, stretches on two threads, the reserve search driven from
    # Python), a block continued from a state, long turning points, many
    # short points, a multiaxial point with a critical-plane scan. No kernel
    # may gain a compiled signature (one would mean a request pays seconds).
    done = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True,
                          timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    assert json.loads(done.stdout.strip().splitlines()[-1]) == {}
