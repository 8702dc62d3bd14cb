"""Reference SSE of scikit-learn k-means++ on small photographs, for tests/engine_quality.rs.

The photographs are the colour sample images that scikit-image and scikit-learn ship:
skimage.data.astronaut, chelsea, coffee, hubble_deep_field, immunohistochemistry,
rocket and retina, and sklearn.datasets.load_sample_images (china.jpg, flower.jpg).
Each is downscaled with Pillow to 160 pixels wide (Image.resize, LANCZOS, height in
proportion, rounded) and written as an 8-bit RGB PNG to fixtures/photos/NAME.png; the
PNG is what both sides read.

For each PNG: every pixel converted to CIELAB (D65, 2 degree observer) with
skimage.color.rgb2lab, then scikit-learn's KMeans(n_clusters=16, init="k-means++",
n_init=1, random_state=s) for s = 0..9 on all pixels (float64), and once with n_init=10
(random_state=0). Records every inertia_ (sum over pixels of the squared distance to the
nearest centre), their mean (the expected SSE of one k-means++ run), and the environment.
Also the least inertia of 300 more single starts (random_state 1000..1299): the best SSE
known for the photo, which random swap from the best of 20 starts does not improve on by
more than 0.05 % (benches/photo_sse_floor.py).

Writes fixtures/reference/engine_sklearn.json. Run from the repository root:

    pip install scikit-learn scikit-image pillow numpy
    python3 tests/reference/engine_sklearn.py
"""
import json
import os
import platform

import numpy as np
import PIL
import skimage
import sklearn
from PIL import Image
from skimage import data as skdata
from skimage.color import rgb2lab
from sklearn.cluster import KMeans
from sklearn.datasets import load_sample_images

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
PHOTOS = os.path.join(ROOT, "fixtures", "photos")
OUT = os.path.join(ROOT, "fixtures", "reference", "engine_sklearn.json")
K = 16
WIDTH = 160
SEEDS = list(range(10))
SKIMAGE = ["astronaut", "chelsea", "coffee", "hubble_deep_field", "immunohistochemistry", "rocket", "retina"]


def sources():
    for name in SKIMAGE:
        yield name, f"skimage.data.{name}()", getattr(skdata, name)()
    bunch = load_sample_images()
    for path, img in zip(bunch.filenames, bunch.images):
        base = os.path.splitext(os.path.basename(path))[0]
        yield base, f"sklearn.datasets.load_sample_images() {os.path.basename(path)}", img


def main():
    os.makedirs(PHOTOS, exist_ok=True)
    out = {
        "source": "scikit-learn KMeans(n_clusters=16, init='k-means++', n_init=1, random_state=s), "
        "s = 0..9, and n_init=10 (random_state=0), on skimage.color.rgb2lab of every pixel of "
        "fixtures/photos/*.png; written by tests/reference/engine_sklearn.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scikit-learn": sklearn.__version__,
            "scikit-image": skimage.__version__,
            "pillow": PIL.__version__,
        },
        "k": K,
        "width": WIDTH,
        "seeds": SEEDS,
        "photos": [],
    }
    for name, origin, img in sources():
        img = np.asarray(img)[:, :, :3]
        h, w = img.shape[:2]
        height = round(h * WIDTH / w)
        small = Image.fromarray(img).resize((WIDTH, height), Image.LANCZOS)
        path = os.path.join(PHOTOS, f"{name}.png")
        small.save(path, optimize=True)
        # Read back what the test reads.
        rgb = np.asarray(Image.open(path).convert("RGB"))
        lab = rgb2lab(rgb).reshape(-1, 3).astype(np.float64)
        inertias = []
        for s in SEEDS:
            km = KMeans(n_clusters=K, init="k-means++", n_init=1, random_state=s).fit(lab)
            inertias.append(float(km.inertia_))
        best10 = float(KMeans(n_clusters=K, init="k-means++", n_init=10, random_state=0).fit(lab).inertia_)
        best300 = min(
            float(KMeans(n_clusters=K, init="k-means++", n_init=1, random_state=1000 + s).fit(lab).inertia_)
            for s in range(300)
        )
        out["photos"].append(
            {
                "name": name,
                "file": f"photos/{name}.png",
                "origin": origin,
                "width": WIDTH,
                "height": height,
                "pixels": int(lab.shape[0]),
                "inertia_n_init_1": inertias,
                "inertia_n_init_1_mean": float(np.mean(inertias)),
                "inertia_n_init_10": best10,
                "inertia_best_of_300": best300,
            }
        )
        print(name, WIDTH, height, f"mean {np.mean(inertias):.1f}", f"n_init=10 {best10:.1f}")
    with open(OUT, "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
