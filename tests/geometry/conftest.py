"""Fixtures of the geometry tests: independent numpy reference formulas (not used by posebridge).

Each is a textbook closed form written out directly, vectorised over rows:

* point-segment distance: projection onto the line clamped to the segment
  (Ericson, Real-Time Collision Detection, 2004, sec. 5.1.2);
* segment-segment distance by enumeration: the minimum over the four end point
  to segment distances and, where both line parameters of the two lines'
  common perpendicular fall inside (0, 1), that perpendicular's length
  (the minimum of a convex quadratic on a square lies in the interior or on an edge);
* point-box signed distance: clamping to the box outside (Ericson 2004,
  sec. 5.1.4), minus the distance to the nearest face inside;
* point-cylinder signed distance: ``sqrt(max(rho - r, 0)^2 + max(|z| - h, 0)^2)``
  outside, ``max(rho - r, |z| - h)`` inside;
* point-triangle distance: the plane distance where the point's projection
  falls inside the triangle (three edge-side signs), else the nearest of the
  three edges (Ericson 2004, sec. 5.1.5, stated as regions);
* segment-triangle distance: 0 where the segment crosses the triangle's
  plane inside the triangle, else the minimum over the two end point-triangle
  and the three segment-edge distances (Ericson 2004, sec. 5.1.10);
* winding number of a closed triangle surface about points: the sum of the
  triangles' signed solid angles over 4 pi (Van Oosterom and Strackee 1983,
  "The solid angle of a plane triangle", IEEE Trans. Biomed. Eng. 30(2)).
"""

from __future__ import annotations

from collections.abc import Callable
from types import SimpleNamespace

import numpy as np
import pytest


def point_segment_distance(x: np.ndarray, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Distance of points ``x`` to segments ``a b``, all shape (N, 3)."""
    d = b - a
    length2 = np.einsum("ij,ij->i", d, d)
    t = np.where(
        length2 > 0.0, np.einsum("ij,ij->i", x - a, d) / np.where(length2 > 0, length2, 1), 0.0
    )
    t = np.clip(t, 0.0, 1.0)
    return np.linalg.norm(x - (a + t[:, None] * d), axis=1)


def segment_segment_distance(
    p1: np.ndarray, q1: np.ndarray, p2: np.ndarray, q2: np.ndarray
) -> np.ndarray:
    """Distance between segments ``p1 q1`` and ``p2 q2`` by enumeration, shape (N,)."""
    candidates = [
        point_segment_distance(p1, p2, q2),
        point_segment_distance(q1, p2, q2),
        point_segment_distance(p2, p1, q1),
        point_segment_distance(q2, p1, q1),
    ]
    d1 = q1 - p1
    d2 = q2 - p2
    r = p1 - p2
    a = np.einsum("ij,ij->i", d1, d1)
    e = np.einsum("ij,ij->i", d2, d2)
    b = np.einsum("ij,ij->i", d1, d2)
    c = np.einsum("ij,ij->i", d1, r)
    f = np.einsum("ij,ij->i", d2, r)
    denom = a * e - b * b
    ok = denom > 1e-12 * np.maximum(a * e, 1e-300)
    safe = np.where(ok, denom, 1.0)
    s = (b * f - c * e) / safe
    t = (a * f - b * c) / safe
    inside = ok & (s > 0) & (s < 1) & (t > 0) & (t < 1)
    interior = np.linalg.norm((p1 + s[:, None] * d1) - (p2 + t[:, None] * d2), axis=1)
    candidates.append(np.where(inside, interior, np.inf))
    return np.min(candidates, axis=0)


def point_box_signed_distance(x_local: np.ndarray, half: np.ndarray) -> np.ndarray:
    """Signed distance of local points (N, 3) to the box ``|x_i| <= half_i``."""
    excess = np.abs(x_local) - half
    outside = np.linalg.norm(np.maximum(excess, 0.0), axis=1)
    inside = np.minimum(excess.max(axis=1), 0.0)
    return outside + inside


def point_cylinder_signed_distance(
    x_local: np.ndarray, radius: float, half_length: float
) -> np.ndarray:
    """Signed distance of local points (N, 3) to the cylinder about local z."""
    dr = np.hypot(x_local[:, 0], x_local[:, 1]) - radius
    dz = np.abs(x_local[:, 2]) - half_length
    outside = np.hypot(np.maximum(dr, 0.0), np.maximum(dz, 0.0))
    inside = np.minimum(np.maximum(dr, dz), 0.0)
    return outside + inside


def to_local(T_world_shape: np.ndarray, x_world: np.ndarray) -> np.ndarray:
    """World points (N, 3) in a shape's frame: ``R^T (x - t)``."""
    return (x_world - T_world_shape[:3, 3]) @ T_world_shape[:3, :3]


def point_triangles_distance(x: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    """Distance of one point (3,) to each triangle (T, 3, 3), shape (T,)."""
    v0, v1, v2 = triangles[:, 0], triangles[:, 1], triangles[:, 2]
    n = np.cross(v1 - v0, v2 - v0)
    length = np.linalg.norm(n, axis=1)
    ok = length > 1e-300
    unit = n / np.where(ok, length, 1.0)[:, None]
    height = np.einsum("ij,ij->i", x - v0, unit)
    projected = x - height[:, None] * unit
    inside = ok.copy()
    for p, q in ((v0, v1), (v1, v2), (v2, v0)):
        inside &= np.einsum("ij,ij->i", np.cross(q - p, projected - p), n) >= 0.0
    edges = np.min(
        [
            point_segment_distance(np.broadcast_to(x, p.shape), p, q)
            for p, q in ((v0, v1), (v1, v2), (v2, v0))
        ],
        axis=0,
    )
    return np.where(inside, np.abs(height), edges)


def segment_triangles_distance(a: np.ndarray, b: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    """Distance of one segment ``a b`` (3,) to each triangle (T, 3, 3), shape (T,)."""
    v0, v1, v2 = triangles[:, 0], triangles[:, 1], triangles[:, 2]
    count = triangles.shape[0]
    A = np.broadcast_to(a, (count, 3))
    B = np.broadcast_to(b, (count, 3))
    candidates = [point_triangles_distance(a, triangles), point_triangles_distance(b, triangles)]
    for p, q in ((v0, v1), (v1, v2), (v2, v0)):
        candidates.append(segment_segment_distance(A, B, p, q))
    n = np.cross(v1 - v0, v2 - v0)
    da = np.einsum("ij,ij->i", A - v0, n)
    db = np.einsum("ij,ij->i", B - v0, n)
    crossing = (da * db <= 0.0) & (da != db)
    t = np.where(crossing, da / np.where(da != db, da - db, 1.0), 0.0)
    x = A + t[:, None] * (B - A)
    inside = crossing.copy()
    for p, q in ((v0, v1), (v1, v2), (v2, v0)):
        inside &= np.einsum("ij,ij->i", np.cross(q - p, x - p), n) >= 0.0
    candidates.append(np.where(inside, 0.0, np.inf))
    return np.min(candidates, axis=0)


def winding_numbers(points: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    """Winding number of the triangle surface (T, 3, 3) about each point (N, 3), shape (N,)."""
    out = np.empty(points.shape[0])
    for k, x in enumerate(points):
        a = triangles[:, 0] - x
        b = triangles[:, 1] - x
        c = triangles[:, 2] - x
        la, lb, lc = (np.linalg.norm(v, axis=1) for v in (a, b, c))
        numerator = np.einsum("ij,ij->i", a, np.cross(b, c))
        denominator = (
            la * lb * lc
            + np.einsum("ij,ij->i", a, b) * lc
            + np.einsum("ij,ij->i", b, c) * la
            + np.einsum("ij,ij->i", c, a) * lb
        )
        out[k] = np.sum(2.0 * np.arctan2(numerator, denominator)) / (4.0 * np.pi)
    return out


def signed_point_mesh_distance(mesh, x: np.ndarray) -> np.ndarray:
    """Signed distance of points (N, 3) to a TriangleMesh: minus inside a closed one (winding number)."""
    triangles = mesh.triangles
    unsigned = np.array([point_triangles_distance(p, triangles).min() for p in x])
    if not mesh.is_closed:
        return unsigned
    inside = np.abs(winding_numbers(x, triangles)) > 0.5
    return np.where(inside, -unsigned, unsigned)


def capsule_mesh_distance(
    mesh, a: np.ndarray, b: np.ndarray, r: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Brute-force value of posebridge's capsule-mesh distance, and which capsules meet the solid.

    Apart from the solid, ``u - r`` with ``u`` the segment-surface distance
    over all triangles; crossing the surface or inside a closed mesh, the
    documented estimate ``min(sd(a), sd(b), 0) - r``.
    """
    triangles = mesh.triangles
    u = np.array([segment_triangles_distance(a[k], b[k], triangles).min() for k in range(len(a))])
    end_sd = signed_point_mesh_distance(mesh, np.concatenate([a, b])).reshape(2, -1)
    inside = (end_sd < 0.0).any(axis=0) | (u == 0.0)
    estimate = np.minimum(end_sd.min(axis=0), 0.0) - r
    return np.where(inside, estimate, u - r), inside


@pytest.fixture(scope="session")
def reference() -> SimpleNamespace:
    """The reference formulas above: ``reference.segment_segment_distance(...)`` etc."""
    return SimpleNamespace(
        point_segment_distance=point_segment_distance,
        segment_segment_distance=segment_segment_distance,
        point_box_signed_distance=point_box_signed_distance,
        point_cylinder_signed_distance=point_cylinder_signed_distance,
        to_local=to_local,
        point_triangles_distance=point_triangles_distance,
        segment_triangles_distance=segment_triangles_distance,
        winding_numbers=winding_numbers,
        signed_point_mesh_distance=signed_point_mesh_distance,
        capsule_mesh_distance=capsule_mesh_distance,
    )


def box_step_text(lo, hi, *, length_prefix: str = ".MILLI.") -> str:
    """A STEP (ISO 10303-21, AP214) file of one box solid from corner ``lo`` to ``hi``.

    A manifold solid B-rep with six planar faces, written entity by entity
    (ISO 10303-42 topology: vertex points, line edges, edge loops, advanced
    faces, a closed shell) inside the minimal product structure, in the
    length unit ``SI_UNIT(<prefix>, .METRE.)`` (``"$"`` for metres).
    """
    lo = np.asarray(lo, dtype=float)
    hi = np.asarray(hi, dtype=float)
    corners = [
        np.array([(lo, hi)[i][0], (lo, hi)[j][1], (lo, hi)[k][2]])
        for i in (0, 1)
        for j in (0, 1)
        for k in (0, 1)
    ]
    quads = [(0, 1, 3, 2), (4, 6, 7, 5), (0, 4, 5, 1), (2, 3, 7, 6), (0, 2, 6, 4), (1, 5, 7, 3)]
    lines: list[str] = []

    def entity(text: str) -> int:
        lines.append(f"#{len(lines) + 1}={text};")
        return len(lines)

    def vector(values) -> str:
        return "(" + ",".join(f"{x:.9f}" for x in values) + ")"

    points = [entity(f"CARTESIAN_POINT('',{vector(c)})") for c in corners]
    vertices = [entity(f"VERTEX_POINT('',#{p})") for p in points]
    edges: dict[tuple[int, int], int] = {}

    def edge(a: int, b: int) -> tuple[int, bool]:
        key = (min(a, b), max(a, b))
        if key not in edges:
            d = corners[key[1]] - corners[key[0]]
            length = float(np.linalg.norm(d))
            direction = entity(f"DIRECTION('',{vector(d / length)})")
            vec = entity(f"VECTOR('',#{direction},{length:.9f})")
            line = entity(f"LINE('',#{points[key[0]]},#{vec})")
            edges[key] = entity(
                f"EDGE_CURVE('',#{vertices[key[0]]},#{vertices[key[1]]},#{line},.T.)"
            )
        return edges[key], (a, b) == key

    faces = []
    for quad in quads:
        oriented = []
        for i in range(4):
            curve, same = edge(quad[i], quad[(i + 1) % 4])
            oriented.append(entity(f"ORIENTED_EDGE('',*,*,#{curve},{'.T.' if same else '.F.'})"))
        loop = entity("EDGE_LOOP('',(" + ",".join(f"#{o}" for o in oriented) + "))")
        bound = entity(f"FACE_OUTER_BOUND('',#{loop},.T.)")
        c = [corners[i] for i in quad]
        normal = np.cross(c[1] - c[0], c[2] - c[0])
        normal /= np.linalg.norm(normal)
        x_axis = (c[1] - c[0]) / np.linalg.norm(c[1] - c[0])
        nz = entity(f"DIRECTION('',{vector(normal)})")
        nx = entity(f"DIRECTION('',{vector(x_axis)})")
        placement = entity(f"AXIS2_PLACEMENT_3D('',#{points[quad[0]]},#{nz},#{nx})")
        plane = entity(f"PLANE('',#{placement})")
        faces.append(entity(f"ADVANCED_FACE('',(#{bound}),#{plane},.T.)"))
    shell = entity("CLOSED_SHELL('',(" + ",".join(f"#{f}" for f in faces) + "))")
    solid = entity(f"MANIFOLD_SOLID_BREP('',#{shell})")
    origin = entity("CARTESIAN_POINT('',(0.,0.,0.))")
    z = entity("DIRECTION('',(0.,0.,1.))")
    x = entity("DIRECTION('',(1.,0.,0.))")
    axes = entity(f"AXIS2_PLACEMENT_3D('',#{origin},#{z},#{x})")
    length = entity(f"(LENGTH_UNIT()NAMED_UNIT(*)SI_UNIT({length_prefix},.METRE.))")
    angle = entity("(NAMED_UNIT(*)PLANE_ANGLE_UNIT()SI_UNIT($,.RADIAN.))")
    steradian = entity("(NAMED_UNIT(*)SI_UNIT($,.STERADIAN.)SOLID_ANGLE_UNIT())")
    uncertainty = entity(
        f"UNCERTAINTY_MEASURE_WITH_UNIT(LENGTH_MEASURE(1.E-05),#{length},'distance_accuracy_value','')"
    )
    context = entity(
        "(GEOMETRIC_REPRESENTATION_CONTEXT(3)GLOBAL_UNCERTAINTY_ASSIGNED_CONTEXT((#"
        f"{uncertainty}))GLOBAL_UNIT_ASSIGNED_CONTEXT((#{length},#{angle},#{steradian}))"
        "REPRESENTATION_CONTEXT('',''))"
    )
    shape = entity(f"ADVANCED_BREP_SHAPE_REPRESENTATION('',(#{solid},#{axes}),#{context})")
    application = entity("APPLICATION_CONTEXT('automotive design')")
    entity(
        f"APPLICATION_PROTOCOL_DEFINITION('international standard','automotive_design',2000,#{application})"
    )
    product_context = entity(f"PRODUCT_CONTEXT('',#{application},'mechanical')")
    product = entity(f"PRODUCT('box','box','',(#{product_context}))")
    formation = entity(f"PRODUCT_DEFINITION_FORMATION('','',#{product})")
    definition_context = entity(
        f"PRODUCT_DEFINITION_CONTEXT('part definition',#{application},'design')"
    )
    definition = entity(f"PRODUCT_DEFINITION('design','',#{formation},#{definition_context})")
    definition_shape = entity(f"PRODUCT_DEFINITION_SHAPE('','',#{definition})")
    entity(f"SHAPE_DEFINITION_REPRESENTATION(#{definition_shape},#{shape})")
    header = [
        "ISO-10303-21;",
        "HEADER;",
        "FILE_DESCRIPTION(('generated box'),'2;1');",
        "FILE_NAME('box.step','2024-01-01T00:00:00',(''),(''),'','','');",
        "FILE_SCHEMA(('AUTOMOTIVE_DESIGN { 1 0 10303 214 1 1 1 1 }'));",
        "ENDSEC;",
        "DATA;",
    ]
    return "\n".join([*header, *lines, "ENDSEC;", "END-ISO-10303-21;", ""])


@pytest.fixture(scope="session")
def box_step() -> Callable[..., str]:
    """:func:`box_step_text`: the text of a generated STEP file of one box."""
    return box_step_text
