// The parts of three.js that opspace's 3-D view (opspace/report/_view3d.js) uses;
// esbuild keeps only these (tree shaking) in opspace/report/_three.min.js.
export {
  AmbientLight, BoxGeometry, BufferAttribute, BufferGeometry, Color, CylinderGeometry,
  DirectionalLight, DoubleSide, GridHelper, Group, HemisphereLight, Line, LineBasicMaterial,
  LineSegments, Matrix4, Mesh, MeshLambertMaterial, MeshStandardMaterial, PerspectiveCamera,
  Quaternion, Scene, SphereGeometry, Vector3, WebGLRenderer, EdgesGeometry, Box3, Sphere,
} from "three";
export { OrbitControls } from "three/examples/jsm/controls/OrbitControls.js";
