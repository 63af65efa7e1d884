use crate::util::Lab;

#[test]
fn init_creates_the_database_and_text_index() {
    let lab = Lab::new();
    assert!(lab.library().join("library.sqlite").is_file());
    assert!(lab.library().join("text-index").is_dir());
    let stats = lab.json(&["stats"]);
    // 4000-400 cm-1 at 2 cm-1 is 1801 points (DESIGN.md default grid).
    let ir = stats["recipes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["technique"] == "ir")
        .unwrap();
    assert_eq!(ir["grid"]["start"], 400.0);
    assert_eq!(ir["grid"]["step"], 2.0);
    // The database records the version of the last migration file in schema/.
    let migrations = std::fs::read_dir(concat!(env!("CARGO_MANIFEST_DIR"), "/schema"))
        .unwrap()
        .count();
    assert_eq!(stats["schema_version"], migrations as i64);
}

#[test]
fn init_refuses_an_existing_library() {
    let lab = Lab::new();
    let err = lab.fails(&["init"], 4);
    assert!(err.contains("already holds a library"), "{err}");
}

#[test]
fn commands_on_a_missing_library_say_how_to_create_one() {
    let lab = Lab::empty();
    let err = lab.fails(&["stats"], 4);
    assert!(err.contains("whorl init"), "{err}");
}
