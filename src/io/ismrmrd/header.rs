//! The ISMRMRD XML header: the parts a 2-D Cartesian cine needs (first encoding only).

/// What the XML header says about the first encoding.
#[derive(Debug, Clone, PartialEq)]
pub struct RawHeader {
    /// Encoded matrix `[x (readout), y (phase encode), z]`.
    pub encoded_matrix: [usize; 3],
    /// Encoded field of view in mm `[x, y, z]`.
    pub encoded_fov_mm: [f64; 3],
    /// Reconstructed matrix `[x, y, z]`.
    pub recon_matrix: [usize; 3],
    /// Reconstructed field of view in mm `[x, y, z]`.
    pub recon_fov_mm: [f64; 3],
    /// `kspace_encoding_step_1` limits `(minimum, maximum, center)`.
    pub step1: (usize, usize, usize),
    /// Number of slices (`slice` maximum + 1; 1 when absent).
    pub slices: usize,
    /// Number of cardiac phases (`phase` maximum + 1; 1 when absent).
    pub phases: usize,
    /// `trajectory` as written (`cartesian`, `radial`, …).
    pub trajectory: String,
    /// `receiverChannels`, when present.
    pub receiver_channels: Option<usize>,
    /// Number of `encoding` elements (only the first is read).
    pub encodings: usize,
}

/// Parses the header; errors name the XML element at fault.
pub fn parse(xml: &str) -> Result<RawHeader, String> {
    let doc = roxmltree::Document::parse(xml).map_err(|e| format!("XML header: {e}"))?;
    let root = doc.root_element();
    if root.tag_name().name() != "ismrmrdHeader" {
        return Err(format!(
            "XML header: root element is `{}`, expected `ismrmrdHeader`",
            root.tag_name().name()
        ));
    }
    let encodings: Vec<_> = children(root, "encoding").collect();
    let enc = *encodings
        .first()
        .ok_or("XML header: no `encoding` element")?;
    let encoded = required(enc, "encodedSpace", "encoding")?;
    let recon = required(enc, "reconSpace", "encoding")?;
    let limits = required(enc, "encodingLimits", "encoding")?;
    let step1 = required(limits, "kspace_encoding_step_1", "encoding/encodingLimits")?;
    let step1_path = "encoding/encodingLimits/kspace_encoding_step_1";
    let counter_size = |name: &'static str| -> Result<usize, String> {
        match child(limits, name) {
            Some(l) => {
                Ok(number::<usize>(l, "maximum", &format!("encoding/encodingLimits/{name}"))? + 1)
            }
            None => Ok(1),
        }
    };
    let trajectory = text(required(enc, "trajectory", "encoding")?);
    let receiver_channels = match child(root, "acquisitionSystemInformation")
        .and_then(|a| child(a, "receiverChannels"))
    {
        Some(n) => Some(parse_text::<usize>(
            n,
            "acquisitionSystemInformation/receiverChannels",
        )?),
        None => None,
    };
    Ok(RawHeader {
        encoded_matrix: matrix(encoded, "encoding/encodedSpace")?,
        encoded_fov_mm: fov(encoded, "encoding/encodedSpace")?,
        recon_matrix: matrix(recon, "encoding/reconSpace")?,
        recon_fov_mm: fov(recon, "encoding/reconSpace")?,
        step1: (
            number(step1, "minimum", step1_path)?,
            number(step1, "maximum", step1_path)?,
            number(step1, "center", step1_path)?,
        ),
        slices: counter_size("slice")?,
        phases: counter_size("phase")?,
        trajectory,
        receiver_channels,
        encodings: encodings.len(),
    })
}

type Node<'a, 'i> = roxmltree::Node<'a, 'i>;

fn children<'a, 'i>(node: Node<'a, 'i>, name: &'static str) -> impl Iterator<Item = Node<'a, 'i>> {
    node.children()
        .filter(move |c| c.is_element() && c.tag_name().name() == name)
}

fn child<'a, 'i>(node: Node<'a, 'i>, name: &'static str) -> Option<Node<'a, 'i>> {
    children(node, name).next()
}

fn required<'a, 'i>(
    node: Node<'a, 'i>,
    name: &'static str,
    parent: &str,
) -> Result<Node<'a, 'i>, String> {
    child(node, name).ok_or_else(|| format!("XML header: `{parent}` has no `{name}` element"))
}

fn text(node: Node) -> String {
    node.text().unwrap_or("").trim().to_string()
}

fn parse_text<T: std::str::FromStr>(node: Node, path: &str) -> Result<T, String> {
    let t = text(node);
    t.parse::<T>()
        .map_err(|_| format!("XML header: `{path}` is `{t}`, not a valid number"))
}

fn number<T: std::str::FromStr>(node: Node, name: &'static str, parent: &str) -> Result<T, String> {
    parse_text(required(node, name, parent)?, &format!("{parent}/{name}"))
}

fn matrix(space: Node, path: &str) -> Result<[usize; 3], String> {
    let m = required(space, "matrixSize", path)?;
    let p = format!("{path}/matrixSize");
    let v = [
        number(m, "x", &p)?,
        number(m, "y", &p)?,
        number(m, "z", &p)?,
    ];
    if v.contains(&0) {
        return Err(format!(
            "XML header: `{p}` is {v:?}: every size must be at least 1"
        ));
    }
    Ok(v)
}

fn fov(space: Node, path: &str) -> Result<[f64; 3], String> {
    let m = required(space, "fieldOfView_mm", path)?;
    let p = format!("{path}/fieldOfView_mm");
    let v: [f64; 3] = [
        number(m, "x", &p)?,
        number(m, "y", &p)?,
        number(m, "z", &p)?,
    ];
    if v.iter().any(|x| !x.is_finite() || *x <= 0.0) {
        return Err(format!(
            "XML header: `{p}` is {v:?}: every extent must be a positive number of mm"
        ));
    }
    Ok(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A header in the layout of the ISMRMRD schema (ismrmrd.xsd of the open standard).
    fn xml(trajectory: &str, fov_z: &str) -> String {
        format!(
            r#"<?xml version="1.0"?>
<ismrmrdHeader xmlns="http://www.ismrm.org/ISMRMRD">
 <acquisitionSystemInformation><receiverChannels>8</receiverChannels></acquisitionSystemInformation>
 <encoding>
  <encodedSpace><matrixSize><x>256</x><y>160</y><z>1</z></matrixSize>
   <fieldOfView_mm><x>600</x><y>300</y><z>8</z></fieldOfView_mm></encodedSpace>
  <reconSpace><matrixSize><x>128</x><y>160</y><z>1</z></matrixSize>
   <fieldOfView_mm><x>300</x><y>300</y><z>{fov_z}</z></fieldOfView_mm></reconSpace>
  <encodingLimits>
   <kspace_encoding_step_1><minimum>0</minimum><maximum>159</maximum><center>80</center></kspace_encoding_step_1>
   <phase><minimum>0</minimum><maximum>24</maximum><center>0</center></phase>
  </encodingLimits>
  <trajectory>{trajectory}</trajectory>
 </encoding>
</ismrmrdHeader>"#
        )
    }

    #[test]
    fn reads_the_first_encoding() {
        let h = parse(&xml("cartesian", "8")).expect("valid header");
        assert_eq!(h.encoded_matrix, [256, 160, 1]);
        assert_eq!(h.recon_matrix, [128, 160, 1]);
        assert_eq!(h.encoded_fov_mm, [600.0, 300.0, 8.0]);
        assert_eq!(h.step1, (0, 159, 80));
        assert_eq!((h.slices, h.phases), (1, 25));
        assert_eq!(h.trajectory, "cartesian");
        assert_eq!(h.receiver_channels, Some(8));
    }

    #[test]
    fn a_bad_value_names_its_element() {
        let e = parse(&xml("cartesian", "-3")).unwrap_err();
        assert!(e.contains("encoding/reconSpace/fieldOfView_mm"), "{e}");
        let e = parse(&xml("cartesian", "abc")).unwrap_err();
        assert!(e.contains("fieldOfView_mm/z") && e.contains("abc"), "{e}");
        let e = parse("<ismrmrdHeader><encoding/></ismrmrdHeader>").unwrap_err();
        assert!(e.contains("`encoding` has no `encodedSpace`"), "{e}");
        let e = parse("<other/>").unwrap_err();
        assert!(e.contains("root element is `other`"), "{e}");
        assert!(parse("<ismrmrdHeader><encoding>")
            .unwrap_err()
            .contains("XML header"));
    }
}
