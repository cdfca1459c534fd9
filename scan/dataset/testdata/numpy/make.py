# Writes the reference files in this folder with NumPy itself
# (run with a Python that has NumPy; the files were made with NumPy 1.24.2).
import numpy as np
from numpy.lib import format as npf

a = np.arange(6, dtype=np.float64).reshape(2, 3) + 0.5   # [[0.5 1.5 2.5] [3.5 4.5 5.5]]

def save(name, arr, version=None):
    with open(name, "wb") as f:
        npf.write_array(f, arr, version=version)

save("v1_f4.npy", a.astype("<f4"), (1, 0))
save("v2_f8.npy", a.astype("<f8"), (2, 0))
save("v3_i2.npy", (a * 2).astype("<i2"), (3, 0))
save("be_u2.npy", (a * 2).astype(">u2"))
save("be_f4.npy", a.astype(">f4"))
save("i4.npy", np.array([[0, 13, -11], [2212, 211, 22]], dtype="<i4"))
save("fortran.npy", np.asfortranarray(a.astype("<f4")))
save("i8.npy", a.astype("<i8"))
save("rank3.npy", np.zeros((2, 3, 1), dtype="<f4"))
save("nan.npy", np.array([[0, np.nan, 2]], dtype="<f4"))
np.savez("savez.npz", coll=a.astype(np.float32), coll_truth=np.ones((2, 3), dtype=np.int32))
np.savez_compressed("savez_compressed.npz", coll=a.astype(np.float32))
