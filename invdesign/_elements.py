"""Unit-cell elements: rods, disks and spheres, as JAX pytrees of their geometric parameters.

All lengths in nm, angles in degrees (the design-file units); the physics converts to SI. Every numeric
field is a pytree leaf (so the optimiser can differentiate through it); the material name is static
metadata.

Geometry conventions:
  * The cell lies in the x–y plane; the substrate surface is z = 0 and the superstrate is z > 0.
  * ``center`` is the in-plane centre (x, y) of the element's footprint.
  * A rod is a rectangular block length × width × thickness; ``angle_deg`` rotates its length axis
    from +x towards +y. A disk is a cylinder of ``diameter`` and ``thickness``. A sphere has ``radius``.
  * The point dipole(s) of an element sit at half its height: z = thickness/2 (sphere: z = radius).
"""

import dataclasses
import math
from functools import partial

import jax
import jax.numpy as jnp


def _pytree(cls, fields):
    return partial(jax.tree_util.register_dataclass, data_fields=fields, meta_fields=["material"])(cls)


@dataclasses.dataclass(frozen=True)
class Rod:
    """Rectangular metal rod. Fields in nm (``angle_deg`` in degrees); ``center`` has shape (2,)."""

    center: jax.Array
    length: jax.Array
    width: jax.Array
    thickness: jax.Array
    angle_deg: jax.Array
    material: str

    shape = "rod"

    def height(self):
        """z of the element's dipole(s) above the substrate, nm."""
        return 0.5 * self.thickness

    def axes(self):
        """Principal axes as columns of a (3, 3) rotation: length, width, thickness directions."""
        th = jnp.deg2rad(self.angle_deg)
        c, s = jnp.cos(th), jnp.sin(th)
        zero, one = jnp.zeros_like(c), jnp.ones_like(c)
        return jnp.array([[c, -s, zero], [s, c, zero], [zero, zero, one]])

    def dimensions(self):
        """Full extents along the principal axes, nm, shape (3,)."""
        return jnp.stack([self.length, self.width, self.thickness])

    def volume(self):
        """Volume, nm³."""
        return self.length * self.width * self.thickness

    def surface_area(self):
        """Surface area of the rectangular block, nm²: 2(LW + LT + WT)."""
        lw, lt, wt = self.length * self.width, self.length * self.thickness, self.width * self.thickness
        return 2.0 * (lw + lt + wt)


@dataclasses.dataclass(frozen=True)
class Disk:
    """Metal cylinder (nanodisk) standing on the substrate. Fields in nm; ``center`` has shape (2,)."""

    center: jax.Array
    diameter: jax.Array
    thickness: jax.Array
    material: str

    shape = "disk"

    def height(self):
        """z of the element's dipole above the substrate, nm."""
        return 0.5 * self.thickness

    def axes(self):
        """Principal axes (identity: x, y in-plane, z normal), shape (3, 3)."""
        return jnp.eye(3)

    def dimensions(self):
        """Full extents along x, y, z, nm, shape (3,)."""
        return jnp.stack([self.diameter, self.diameter, self.thickness])

    def volume(self):
        """Volume, nm³."""
        return math.pi / 4.0 * self.diameter**2 * self.thickness

    def surface_area(self):
        """Surface area of the cylinder (two faces and the side), nm²: πD²/2 + πDT."""
        return math.pi * self.diameter * (0.5 * self.diameter + self.thickness)


@dataclasses.dataclass(frozen=True)
class Sphere:
    """Metal sphere resting on the substrate. Fields in nm; ``center`` has shape (2,)."""

    center: jax.Array
    radius: jax.Array
    material: str

    shape = "sphere"

    def height(self):
        """z of the sphere's centre above the substrate, nm."""
        return self.radius

    def axes(self):
        """Principal axes (identity), shape (3, 3)."""
        return jnp.eye(3)

    def dimensions(self):
        """Diameter along x, y, z, nm, shape (3,)."""
        d = 2.0 * self.radius
        return jnp.stack([d, d, d])

    def volume(self):
        """Volume, nm³."""
        return 4.0 / 3.0 * math.pi * self.radius**3

    def surface_area(self):
        """Surface area, nm²: 4πR²."""
        return 4.0 * math.pi * self.radius**2


Rod = _pytree(Rod, ["center", "length", "width", "thickness", "angle_deg"])
Disk = _pytree(Disk, ["center", "diameter", "thickness"])
Sphere = _pytree(Sphere, ["center", "radius"])

Element = Rod | Disk | Sphere


def effective_length(element):
    """Mean free path allowed by the geometry, L_eff = 4V/S in nm (sphere: 4R/3).

    The geometric-probability mean chord of a convex body (E. A. Coronado and G. C. Schatz, J. Chem. Phys.
    119, 3926 (2003)); used by size-dependent damping (``invdesign._materials.size_damping``).
    Differentiable in the element's dimensions.
    """
    return 4.0 * element.volume() / element.surface_area()


def stack_elements(elements):
    """Same-class elements as one pytree with a leading axis (n,) on every field; material names dropped
    (they are static metadata and would make the tree structures differ)."""
    bare = [dataclasses.replace(e, material="") for e in elements]
    return jax.tree_util.tree_map(lambda *xs: jnp.stack([jnp.asarray(x, dtype=float) for x in xs]), *bare)
