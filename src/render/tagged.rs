//! The logical structure of a PDF report (tagged PDF, ISO 32000-1 section 14.8; the PDF/UA-1
//! requirements of ISO 14289-1 for headings, lists, tables, figures and artifacts).
//!
//! While the layout draws, it opens and closes structure elements ([`Tags::open`],
//! [`Tags::close`]) and wraps every piece of real content in a marked-content sequence with an
//! MCID ([`Tags::begin_content`]); rules, fills, repeated table headers and the running header
//! and footer are wrapped as artifacts. After printpdf has written the pages, [`write_structure`]
//! adds the structure tree, the parent tree, `/MarkInfo`, `/Lang`, `/DisplayDocTitle` and an XMP
//! metadata stream with the PDF/UA identifier. printpdf 0.12 writes marked-content operators but
//! builds no structure tree, which is why this is written here.

use lopdf::{Dictionary, Object, ObjectId, Stream, StringFormat};
use printpdf::Op;
use printpdf::xobject::DictItem;
use std::collections::BTreeMap;

/// A structure element's kid: another element or a marked-content sequence on a page.
#[derive(Debug, Clone)]
enum Kid {
    Elem(usize),
    Content { page: usize, mcid: i64 },
}

#[derive(Debug, Clone)]
struct Elem {
    role: &'static str,
    parent: Option<usize>,
    kids: Vec<Kid>,
    alt: Option<String>,
    /// `/Scope` of a table header cell: `Column` or `Row`.
    scope: Option<&'static str>,
}

/// The structure tree being built while the layout draws.
#[derive(Debug, Clone)]
pub struct Tags {
    elems: Vec<Elem>,
    stack: Vec<usize>,
    /// Per page: the element that owns each MCID, in MCID order (the parent tree's arrays).
    owners: Vec<Vec<usize>>,
}

impl Default for Tags {
    fn default() -> Self {
        Tags {
            elems: vec![Elem {
                role: "Document",
                parent: None,
                kids: Vec::new(),
                alt: None,
                scope: None,
            }],
            stack: vec![0],
            owners: vec![Vec::new()],
        }
    }
}

impl Tags {
    /// A new page was started.
    pub fn new_page(&mut self) {
        self.owners.push(Vec::new());
    }

    fn current(&self) -> usize {
        *self
            .stack
            .last()
            .expect("the Document element is never closed")
    }

    /// Opens a structure element of `role` (a standard structure type) inside the current one.
    pub fn open(&mut self, role: &'static str) {
        let parent = self.current();
        let idx = self.elems.len();
        self.elems.push(Elem {
            role,
            parent: Some(parent),
            kids: Vec::new(),
            alt: None,
            scope: None,
        });
        self.elems[parent].kids.push(Kid::Elem(idx));
        self.stack.push(idx);
    }

    /// Opens a table header cell with its scope (`Column` or `Row`).
    pub fn open_header_cell(&mut self, scope: &'static str) {
        self.open("TH");
        let idx = self.current();
        self.elems[idx].scope = Some(scope);
    }

    /// Opens a figure with its alternative text.
    pub fn open_figure(&mut self, alt: &str) {
        self.open("Figure");
        let idx = self.current();
        self.elems[idx].alt = Some(alt.to_string());
    }

    /// Closes the innermost open element.
    pub fn close(&mut self) {
        debug_assert!(self.stack.len() > 1, "closing the Document element");
        if self.stack.len() > 1 {
            self.stack.pop();
        }
    }

    /// Starts a marked-content sequence on the last page for the current element.
    pub fn begin_content(&mut self, ops: &mut Vec<Op>) {
        let owner = self.current();
        let page = self.owners.len() - 1;
        let mcid = self.owners[page].len() as i64;
        self.owners[page].push(owner);
        self.elems[owner].kids.push(Kid::Content { page, mcid });
        ops.push(Op::BeginMarkedContentWithProperties {
            tag: self.elems[owner].role.to_string(),
            properties: DictItem::Dict {
                map: BTreeMap::from([("MCID".to_string(), DictItem::Int(mcid))]),
            },
        });
    }

    /// Ends the sequence begun by [`Tags::begin_content`].
    pub fn end_content(ops: &mut Vec<Op>) {
        ops.push(Op::EndMarkedContent);
    }
}

/// Starts an artifact (decoration that is not content: rules, fills, running headers).
pub fn begin_artifact(ops: &mut Vec<Op>) {
    ops.push(Op::BeginMarkedContent {
        tag: "Artifact".to_string(),
    });
}

/// Ends an artifact.
pub fn end_artifact(ops: &mut Vec<Op>) {
    ops.push(Op::EndMarkedContent);
}

fn name(s: &str) -> Object {
    Object::Name(s.as_bytes().to_vec())
}

/// Metadata written into the document catalog and its XMP stream.
pub struct Meta<'a> {
    /// Document title, shown in the viewer's window (`/DisplayDocTitle`).
    pub title: &'a str,
    /// Author.
    pub author: &'a str,
    /// Subject.
    pub subject: &'a str,
    /// Natural language of the text (BCP 47), e.g. `en`.
    pub lang: &'a str,
    /// Creation date, ISO 8601 (`2026-09-30T00:00:00`).
    pub created: &'a str,
    /// Producer string.
    pub producer: &'a str,
}

/// Adds the structure tree, parent tree, marking, language, title display and XMP metadata
/// to a document whose pages were drawn with `tags`. `text_string` encodes a PDF text string.
pub fn write_structure(
    lo: &mut lopdf::Document,
    tags: &Tags,
    meta: &Meta<'_>,
    text_string: fn(&str) -> Object,
) -> Result<(), String> {
    let pages: Vec<ObjectId> = lo.get_pages().into_values().collect();
    if pages.len() != tags.owners.len() {
        return Err(format!(
            "{} pages drawn but {} written",
            tags.owners.len(),
            pages.len()
        ));
    }
    let root_id = lo.new_object_id();
    let ids: Vec<ObjectId> = tags.elems.iter().map(|_| lo.new_object_id()).collect();
    for (i, e) in tags.elems.iter().enumerate() {
        let mut d = Dictionary::new();
        d.set("Type", name("StructElem"));
        d.set("S", name(e.role));
        d.set("P", Object::Reference(e.parent.map_or(root_id, |p| ids[p])));
        let kids: Vec<Object> = e
            .kids
            .iter()
            .map(|k| match k {
                Kid::Elem(j) => Object::Reference(ids[*j]),
                Kid::Content { page, mcid } => Object::Dictionary(Dictionary::from_iter([
                    ("Type", name("MCR")),
                    ("Pg", Object::Reference(pages[*page])),
                    ("MCID", Object::Integer(*mcid)),
                ])),
            })
            .collect();
        d.set("K", Object::Array(kids));
        if let Some(Kid::Content { page, .. }) =
            e.kids.iter().find(|k| matches!(k, Kid::Content { .. }))
        {
            d.set("Pg", Object::Reference(pages[*page]));
        }
        if let Some(alt) = &e.alt {
            d.set("Alt", text_string(alt));
        }
        if let Some(scope) = e.scope {
            d.set(
                "A",
                Object::Dictionary(Dictionary::from_iter([
                    ("O", name("Table")),
                    ("Scope", name(scope)),
                ])),
            );
        }
        lo.objects.insert(ids[i], Object::Dictionary(d));
    }
    // Parent tree: page i's StructParents key i maps each MCID to its element.
    let mut nums = Vec::with_capacity(2 * pages.len());
    for (i, owners) in tags.owners.iter().enumerate() {
        nums.push(Object::Integer(i as i64));
        nums.push(Object::Array(
            owners.iter().map(|o| Object::Reference(ids[*o])).collect(),
        ));
    }
    let parent_tree = lo.add_object(Dictionary::from_iter([("Nums", Object::Array(nums))]));
    lo.objects.insert(
        root_id,
        Object::Dictionary(Dictionary::from_iter([
            ("Type", name("StructTreeRoot")),
            ("K", Object::Reference(ids[0])),
            ("ParentTree", Object::Reference(parent_tree)),
            ("ParentTreeNextKey", Object::Integer(pages.len() as i64)),
        ])),
    );
    for (i, p) in pages.iter().enumerate() {
        let page = lo.get_dictionary_mut(*p).map_err(|e| e.to_string())?;
        page.set("StructParents", Object::Integer(i as i64));
        page.set("Tabs", name("S"));
    }
    let mut xmp = Stream::new(
        Dictionary::from_iter([("Type", name("Metadata")), ("Subtype", name("XML"))]),
        xmp_packet(meta).into_bytes(),
    );
    // Metadata stays readable by tools that do not decompress (ISO 32000-1, 14.3.2).
    xmp.allows_compression = false;
    let xmp_id = lo.add_object(xmp);
    let catalog_id = lo
        .trailer
        .get(b"Root")
        .and_then(Object::as_reference)
        .map_err(|e| e.to_string())?;
    let catalog = lo
        .get_dictionary_mut(catalog_id)
        .map_err(|e| e.to_string())?;
    catalog.set("StructTreeRoot", Object::Reference(root_id));
    catalog.set(
        "MarkInfo",
        Object::Dictionary(Dictionary::from_iter([("Marked", Object::Boolean(true))])),
    );
    catalog.set(
        "Lang",
        Object::String(meta.lang.as_bytes().to_vec(), StringFormat::Literal),
    );
    catalog.set(
        "ViewerPreferences",
        Object::Dictionary(Dictionary::from_iter([(
            "DisplayDocTitle",
            Object::Boolean(true),
        )])),
    );
    catalog.set("Metadata", Object::Reference(xmp_id));
    Ok(())
}

fn xml_escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            c if c.is_control() => {}
            c => out.push(c),
        }
    }
    out
}

/// The XMP packet (ISO 16684-1) with Dublin Core title, author and subject, and the PDF/UA
/// identification schema (ISO 14289-1, 5: `pdfuaid:part` = 1).
fn xmp_packet(meta: &Meta<'_>) -> String {
    format!(
        r#"<?xpacket begin="" id="W5M0MpCehiHzreSzNTczkc9d"?>
<x:xmpmeta xmlns:x="adobe:ns:meta/">
 <rdf:RDF xmlns:rdf="http://www.w3.org/1999/02/22-rdf-syntax-ns#">
  <rdf:Description rdf:about=""
    xmlns:dc="http://purl.org/dc/elements/1.1/"
    xmlns:pdf="http://ns.adobe.com/pdf/1.3/"
    xmlns:xmp="http://ns.adobe.com/xap/1.0/"
    xmlns:pdfuaid="http://www.aiim.org/pdfua/ns/id/">
   <dc:title><rdf:Alt><rdf:li xml:lang="x-default">{title}</rdf:li></rdf:Alt></dc:title>
   <dc:creator><rdf:Seq><rdf:li>{author}</rdf:li></rdf:Seq></dc:creator>
   <dc:description><rdf:Alt><rdf:li xml:lang="x-default">{subject}</rdf:li></rdf:Alt></dc:description>
   <dc:language><rdf:Bag><rdf:li>{lang}</rdf:li></rdf:Bag></dc:language>
   <pdf:Producer>{producer}</pdf:Producer>
   <xmp:CreatorTool>cohortpress</xmp:CreatorTool>
   <xmp:CreateDate>{created}</xmp:CreateDate>
   <xmp:ModifyDate>{created}</xmp:ModifyDate>
   <pdfuaid:part>1</pdfuaid:part>
  </rdf:Description>
 </rdf:RDF>
</x:xmpmeta>
<?xpacket end="w"?>"#,
        title = xml_escape(meta.title),
        author = xml_escape(meta.author),
        subject = xml_escape(meta.subject),
        lang = xml_escape(meta.lang),
        producer = xml_escape(meta.producer),
        created = xml_escape(meta.created),
    )
}
