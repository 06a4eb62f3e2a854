//! Ray–texture intersection throughput (elements/s = rays/s), seeded rays, no I/O in the loop.
//!
//! Run: `cargo bench --bench intersect`. Rays: "from above" start 1 µm over the texture at
//! uniform positions in the unit cell with directions uniform in the downward hemisphere
//! (|dz| ≥ 0.1); "facet events" are the specular reflections of those rays leaving their first
//! hit (origin offset from the facet, `skip` set), the typical query inside a trace.

use criterion::{Criterion, Throughput, black_box, criterion_group, criterion_main};
use lightfold::geometry::robust::offset_origin;
use lightfold::geometry::{FacetId, Vec3};
use lightfold::sampling::Stream;
use lightfold::texture::pyramids::RegularPyramidsSpec;
use lightfold::texture::random::RandomPyramidsSpec;
use lightfold::texture::{self, RandomPyramids, RegularPyramids, Texture};

const RAYS: usize = 1 << 14;

type Ray = (Vec3, Vec3, Option<FacetId>);

/// Seeded rays from above, uniform over the unit cell.
fn rays_from_above(tex: &dyn Texture, seed: u64) -> Vec<Ray> {
    let mut s = Stream::new(seed, 0, 0);
    let [a, b] = tex.lattice_um();
    let z = tex.z_range_um()[1] + 1.0;
    (0..RAYS)
        .map(|_| {
            let (u, v) = (s.uniform(), s.uniform());
            let o = Vec3::new(u * a[0] + v * b[0], u * a[1] + v * b[1], z);
            let d = loop {
                let h = s.uniform_hemisphere();
                if h.z >= 0.1 {
                    break Vec3::new(h.x, h.y, -h.z);
                }
            };
            (o, d, None)
        })
        .collect()
}

/// Specular reflections of the rays' first hits, leaving the facet.
fn facet_events(tex: &dyn Texture, seed: u64) -> Vec<Ray> {
    rays_from_above(tex, seed)
        .into_iter()
        .filter_map(|(o, d, _)| {
            let h = tex.intersect(o, d, None)?;
            let r = (d - 2.0 * d.dot(h.normal) * h.normal).normalize();
            Some((
                offset_origin(h.point, h.p_err, h.normal, r),
                r,
                Some(h.facet),
            ))
        })
        .collect()
}

fn count_hits(tex: &dyn Texture, rays: &[Ray]) -> usize {
    rays.iter()
        .filter(|(o, d, skip)| tex.intersect(*o, *d, *skip).is_some())
        .count()
}

fn bench_texture(c: &mut Criterion, name: &str, tex: &dyn Texture) {
    let mut g = c.benchmark_group("intersect");
    for (kind, rays) in [
        ("from above", rays_from_above(tex, 42)),
        ("facet events", facet_events(tex, 42)),
    ] {
        g.throughput(Throughput::Elements(rays.len() as u64));
        g.bench_function(format!("{name}, {kind}"), |b| {
            b.iter(|| count_hits(black_box(tex), black_box(&rays)))
        });
    }
    g.finish();
}

fn intersect(c: &mut Criterion) {
    let upright = RegularPyramids::new(RegularPyramidsSpec::upright(10.0)).unwrap();
    bench_texture(c, "regular upright pyramids", &upright);
    let inverted = RegularPyramids::new(RegularPyramidsSpec::inverted(9.5, 10.0)).unwrap();
    bench_texture(c, "inverted pyramids", &inverted);
    for h in [1.0, 3.0] {
        let random =
            RandomPyramids::new(RandomPyramidsSpec::log_normal_height(h, 0.35, 1)).unwrap();
        bench_texture(c, &format!("random pyramids {h} µm"), &random);
    }
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("geometries");
    let map = texture::from_file(dir.join("height-map-bumps.toml")).unwrap();
    bench_texture(c, "height map 64×64", map.as_ref());
}

criterion_group!(benches, intersect);
criterion_main!(benches);
